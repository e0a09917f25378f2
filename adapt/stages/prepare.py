"""The prepare stage: raw documents in, a cleaned, filtered, de-duplicated and split corpus out.

Three passes keep memory bounded by per-document signatures rather than by text:
  A. read + normalise (workers) -> spill to disk; count line hashes for boilerplate
  B. boilerplate, charset, length, language, personal data, quality, contamination, signatures (workers) -> spill
  C. clusters known: write train/ and heldout/ shards, removed.parquet, profile, manifest
Input files are only ever opened for reading.
"""

from __future__ import annotations

import shutil
import time
from pathlib import Path
from typing import Iterable, Iterator

import numpy as np
import pyarrow as pa
from tqdm import tqdm

from adapt.common.errors import InputError, Problems, UserError
from adapt.common.io import atomic_write_json, atomic_write_text
from adapt.config.common import optional_str
from adapt.config.prepare import PrepareJob, validate
from adapt.contracts.labelled_task import FORMAT_NAMES, find_split_files
from adapt.contracts.manifest import RunFolder
from adapt.contracts.model_folder import resolve_model_folder
from adapt.contracts.prepared_corpus import OUTPUT_SCHEMA, REMOVED_SCHEMA, ShardWriter, clear_prepared
from adapt.corpus import cleaning
from adapt.corpus.contamination import TaskIndex, contamination_summary, load_task_texts
from adapt.corpus.docwork import ChunkResult, WorkState, filter_chunk, normalise_chunk
from adapt.corpus.engine import open_engine
from adapt.corpus.profile import TextSample, length_histogram, tokenizer_stats, unigram_overlap
from adapt.corpus.profile_builder import ProfileBuilder, summary_lines
from adapt.corpus.readers import ReadStats, list_input_files, read_documents
from adapt.corpus.shards import Spill
from adapt.corpus.split import assign_heldout

NORMALISED = pa.schema([("id", pa.string()), ("text", pa.string()), ("source", pa.string()),
                        ("markup_share", pa.float32())])
FILTERED = pa.schema([("id", pa.string()), ("text", pa.string()), ("source", pa.string()),
                      ("quality", pa.float32()), ("words", pa.int32())])


def resolve_path(value: str | None) -> Path | None:
    """A path setting, with ``${samples_dir:}`` resolved when the config did not come through Hydra."""
    value = optional_str(value)
    if value is None:
        return None
    if "${" in value:
        from omegaconf import OmegaConf

        from adapt.config import register_schemas

        register_schemas()
        value = str(OmegaConf.create({"v": value}).v)
    return Path(value)


def batched(items: Iterable, size: int) -> Iterator[list]:
    batch = []
    for item in items:
        batch.append(item)
        if len(batch) >= size:
            yield batch
            batch = []
    if batch:
        yield batch


def _check_settings(cfg: PrepareJob) -> dict[str, Path | None]:
    """Resolve and check the paths in the settings before any work, so that a typo fails at once."""
    paths = {"gold": resolve_path(cfg.quality.gold_path), "tasks": resolve_path(cfg.contamination.task_dir),
             "general": resolve_path(cfg.profile.general_path)}
    if paths["gold"] is not None and not paths["gold"].is_file():
        raise InputError(f"quality.gold_path={paths['gold']}: file not found; give a {FORMAT_NAMES} gold set "
                         f"with {cfg.quality.text_field} and {cfg.quality.label_field} (good/poor), or "
                         "quality.gold_path=null for the heuristic score")
    if paths["tasks"] is not None:
        find_split_files(paths["tasks"], "contamination.task_dir", required=False)
    if paths["general"] is not None and not paths["general"].exists():
        raise InputError(f"profile.general_path={paths['general']}: does not exist; give a folder or file of "
                         "general text, or profile.general_path=null to skip the comparison")
    # loading the tokenizer imports torch, which waits until the end
    resolve_model_folder(cfg.profile.encoder.name_or_path, "profile.encoder.name_or_path")
    return paths


def _prepare_models(cfg: PrepareJob, paths: dict, pb: ProfileBuilder):
    """Quality model (trained on the gold set, or the heuristic) and the task-text index."""
    from adapt.corpus.quality import heuristic_model, train_quality_model  # scikit-learn: once inputs are read

    gold = paths["gold"]
    quality = (train_quality_model(gold, cfg.quality, cfg.charset.language, cfg.seed) if gold
               else heuristic_model(cfg.charset.language))
    pb.quality_report(quality)
    task_dir = paths["tasks"]
    tasks = (TaskIndex(load_task_texts(task_dir, cfg.contamination.text_field), cfg.contamination.ngram_words,
                       cfg.seed).build() if task_dir else None)
    return quality, tasks


def _pass_a(cfg: PrepareJob, engine, spill: Spill, pb: ProfileBuilder,  # noqa: ANN001 - engine.open_engine
            stats: ReadStats) -> tuple[np.ndarray, int]:
    """Read and normalise; returns (line hashes of distinct documents, number of distinct documents)."""
    keys, seen = [], set()
    docs = ((d.id, d.text, d.source) for d in read_documents(cfg.inputs, cfg.read, stats))
    bar = tqdm(desc="clean", unit="doc", disable=not cfg.runtime.progress, delay=1.0)
    with engine.workers(WorkState(cfg)) as workers:
        for results in workers.imap(normalise_chunk, batched(docs, cfg.chunk_docs)):
            rows = []
            for doc_id, text, source, markup, controls, repairs, line_keys, raw_words in results:
                pb.funnel["read"][1] += raw_words
                pb.counts["control_chars_removed"] += controls
                pb.counts["mojibake_repairs"] += repairs
                pb.counts["docs_with_markup"] += markup > 0.01
                if not text:
                    pb.remove({"id": doc_id, "source": source, "reason": "empty_after_cleaning",
                               "detail": "no text left after markup and control characters were removed",
                               "text": ""})
                    continue
                h = cleaning.document_key(text)
                if h not in seen:  # exact copies must not make their own lines look like boilerplate
                    seen.add(h)
                    keys.append(line_keys)
                rows.append({"id": doc_id, "text": text, "source": source, "markup_share": markup})
            spill.write(rows)
            pb.funnel_add("cleaned", len(rows), sum(cleaning.count_words(r["text"]) for r in rows))
            bar.update(len(results))
    bar.close()
    all_keys = np.concatenate(keys) if keys else np.empty(0, np.uint64)
    return all_keys, len(seen)


def _pass_b(cfg: PrepareJob, engine, state: WorkState, src: Spill, dst: Spill,  # noqa: ANN001
            pb: ProfileBuilder) -> dict:
    """Filters and signatures; returns per kept document: hash, quality, words, id, signature; and task hits."""
    kept: dict[str, list] = {"hashes": [], "quality": [], "words": [], "ids": [], "sigs": [], "hits": []}
    bar = tqdm(total=src.count, desc="filter", unit="doc", disable=not cfg.runtime.progress, delay=1.0)
    with engine.workers(state) as workers:
        res: ChunkResult
        for res in workers.imap(filter_chunk, src.batches(cfg.chunk_docs)):
            pb.merge_chunk(res)
            dst.write([{k: d[k] for k in ("id", "text", "source", "quality", "words")} for d in res.kept])
            kept["hashes"] += [d["doc_hash"] for d in res.kept]
            kept["quality"] += [d["quality"] for d in res.kept]
            kept["words"] += [d["words"] for d in res.kept]
            kept["ids"] += [d["id"] for d in res.kept]
            kept["hits"] += res.task_hits
            if res.signatures is not None:
                kept["sigs"].append(res.signatures)
            bar.update(len(res.kept) + len(res.removed))
    bar.close()
    kept["sigs"] = engine.collect_signatures(kept["sigs"])  # an array, or partitions left on a cluster
    for key, dtype in (("hashes", np.uint64), ("quality", float), ("words", np.int64)):
        kept[key] = np.array(kept[key], dtype=dtype)
    return kept


def _pass_c(cfg: PrepareJob, out: Path, src: Spill, clusters, ids: list[str], pb: ProfileBuilder,  # noqa: ANN001
            corpus: TextSample) -> dict:
    heldout = assign_heldout(clusters.cluster_id, clusters.keep, cfg.heldout_share, cfg.seed)
    sizes = np.bincount(clusters.cluster_id, minlength=clusters.num_clusters)
    writers = {"train": ShardWriter(out / "train", OUTPUT_SCHEMA, cfg.shard_docs),
               "heldout": ShardWriter(out / "heldout", OUTPUT_SCHEMA, cfg.shard_docs)}
    words = {"train": 0, "heldout": 0}
    lengths = []
    i = 0
    batches = tqdm(src.batches(cfg.chunk_docs), desc="write", unit="chunk", disable=not cfg.runtime.progress, delay=1.0)
    for batch in batches:
        for d in batch:
            c = int(clusters.cluster_id[i])
            if not clusters.keep[i]:
                r = int(clusters.representative[c])
                pb.remove({"id": d["id"], "source": d["source"], "text": d["text"],
                           "reason": "exact_duplicate" if clusters.exact_copy[i] else "near_duplicate",
                           "detail": f"cluster {c} of {int(sizes[c])} documents; kept {ids[r]}"})
            else:
                split = "heldout" if heldout[i] else "train"
                writers[split].add({**d, "cluster_id": c, "cluster_size": int(sizes[c])})
                words[split] += d["words"]
                lengths.append(d["words"])
                corpus.add(d["text"])
            i += 1
    for w in writers.values():
        w.close()
    return {"train_docs": writers["train"].count, "heldout_docs": writers["heldout"].count,
            "train_words": words["train"], "heldout_words": words["heldout"],
            "train_shards": writers["train"].shards, "heldout_shards": writers["heldout"].shards,
            "clusters_split": int(np.unique(clusters.cluster_id[clusters.keep]).size),
            "length_histogram": length_histogram(np.array(lengths, dtype=np.int64))}


def _general_sample(cfg: PrepareJob, path: Path | None) -> TextSample | None:
    """Cleaned general text (at most 50,000 documents) for the tokenizer and vocabulary comparison."""
    if path is None:
        return None
    sample = TextSample(cfg.charset.language, cfg.profile.sample_docs, cfg.seed)
    for i, d in enumerate(read_documents([str(path)], cfg.read, ReadStats())):
        if i >= 50_000:
            break
        sample.add(cleaning.normalise_text(d.text).text)
    return sample


def _dedup(cfg: PrepareJob, engine, kept: dict, pb: ProfileBuilder):  # noqa: ANN001, ANN202 - dedup.Clusters
    d = cfg.dedup
    hashes, words = kept["hashes"], kept["words"]
    clusters = engine.cluster_documents(hashes, kept["sigs"], kept["quality"])
    if d.remove:
        exact = clusters.exact_copy
        pb.funnel_add("exact_duplicates", int((~exact).sum()), int(words[~exact].sum()))
        pb.funnel_add("near_duplicates", int(clusters.keep.sum()), int(words[clusters.keep].sum()))
    else:
        for stage in ("exact_duplicates", "near_duplicates"):
            pb.funnel_add(stage, hashes.size, int(words.sum()))
    pb.dedup_report(clusters, hashes.size, cfg)
    return clusters


def _read_and_clean(cfg: PrepareJob, engine, work: Path, files: list,  # noqa: ANN001
                    pb: ProfileBuilder) -> tuple[Spill, frozenset]:
    """Pass A; returns the spill of cleaned documents and the hashes of boilerplate lines."""
    stats = ReadStats()
    spill = Spill(work / "normalised.parquet", NORMALISED)
    line_keys, distinct = _pass_a(cfg, engine, spill, pb, stats)
    spill.close()
    if stats.docs_read == 0:
        skipped = "; ".join(f"{k}: {v}" for k, v in list(stats.files_skipped.items())[:3])
        raise InputError(f"inputs={list(cfg.inputs)}: no readable documents in {len(files)} file(s)"
                         + (f" ({skipped})" if skipped else "")
                         + "; give .txt, .jsonl, .csv/.tsv or .parquet files (optionally .gz)")
    pb.read_report(stats, files)
    b = cfg.boilerplate
    frequent = (cleaning.frequent_lines(line_keys, distinct, b.min_docs, b.min_doc_share) if b.enabled
                else frozenset())
    pb.counts["boilerplate_distinct_lines"] = len(frequent)
    return spill, frequent


def _measure(cfg: PrepareJob, pb: ProfileBuilder, corpus: TextSample, general: TextSample | None) -> None:
    from adapt.training.encoder import load_tokenizer  # imports torch: only after the worker processes are done

    tokenizer = load_tokenizer(cfg.profile.encoder)
    pb.profile["tokenizer"] = {"encoder": cfg.profile.encoder.name_or_path,
                               "corpus": tokenizer_stats(tokenizer, corpus.sample),
                               "general": tokenizer_stats(tokenizer, general.sample) if general else None}
    pb.profile["unigram_overlap"] = unigram_overlap(corpus, general, cfg.profile.top_unigrams) if general else None


def _run_passes(cfg: PrepareJob, engine, out: Path, files: list, paths: dict,  # noqa: ANN001
                start: float) -> dict:
    pb = ProfileBuilder(cfg)
    work = out / ".work"
    clear_prepared(out)
    spill_a, frequent = _read_and_clean(cfg, engine, work, files, pb)
    quality_model, tasks = _prepare_models(cfg, paths, pb)
    general = _general_sample(cfg, paths["general"])
    spill_b = Spill(work / "filtered.parquet", FILTERED)
    kept = _pass_b(cfg, engine, WorkState(cfg, frequent, quality_model, tasks), spill_a, spill_b, pb)
    spill_b.close()
    if tasks is not None:
        doc_hits: dict[int, list[str]] = {}
        for doc_id, task, _ in kept["hits"]:
            doc_hits.setdefault(task, []).append(doc_id)
        pb.profile["contamination"] = contamination_summary(tasks, doc_hits, pb.reasons["contamination"],
                                                            cfg.contamination)
    clusters = _dedup(cfg, engine, kept, pb)
    corpus = TextSample(cfg.charset.language, cfg.profile.sample_docs, cfg.seed)
    pb.profile["split"] = _pass_c(cfg, out, spill_b, clusters, kept["ids"], pb, corpus)
    _measure(cfg, pb, corpus, general)
    pb.finish(time.time() - start, out)
    pb.write_removed(out / "removed.parquet", REMOVED_SCHEMA)
    atomic_write_json(out / "profile.json", pb.profile)
    atomic_write_text(out / "profile.md", pb.markdown())
    return pb.profile


def run(cfg: PrepareJob) -> dict:
    """Prepare the corpus described by ``cfg``; returns the profile with a ``summary`` of short lines."""
    start = time.time()
    problems = Problems()  # configs built in code have not been through adapt.config.to_job
    validate(cfg, problems)
    problems.raise_if_any()
    out = Path(cfg.out_dir)
    files = list_input_files(cfg.inputs)
    if not files:
        raise InputError(f"inputs={list(cfg.inputs)}: no files found; give files or folders with documents")
    paths = _check_settings(cfg)
    run_folder = RunFolder(out, "prepare", cfg, cfg.inputs, cfg.seed)
    try:
        with open_engine(cfg) as engine:  # a cluster started for this run stops when the passes end
            profile = _run_passes(cfg, engine, out, files, paths, start)
    except UserError as exc:
        run_folder.finish("failed", error=str(exc))
        raise
    finally:
        shutil.rmtree(out / ".work", ignore_errors=True)
    run_folder.finish("completed", summary=profile["totals"])
    return {**profile, "summary": summary_lines(profile, out)}
