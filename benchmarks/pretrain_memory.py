"""Peak memory and start-up time of the pretrain job on 1x and 10x a generated corpus, with the token cache.

For each scale, each in a fresh process: a first run (tokenises into the token cache, stops after 2 steps), the
resumed run (maps the cache; must not tokenise) and, unless --skip-before, the pre-cache data path (every row
read into Python dicts, packed into Python lists and (N, T) int64 tensors) for comparison. The model is the tiny
random BERT of ``debug=tiny`` with the packaged tokenizer (max_seq_len 64), so the data path dominates.
Prints one JSON object. Target: peak RSS at 10x within 1.2x of 1x; the resumed run tokenises nothing.

Usage: python benchmarks/pretrain_memory.py [--docs 5000] [--skip-before] [--work-dir DIR]
"""

from __future__ import annotations

import argparse
import json
import os
import random
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

SCALES = (1, 10)
HELDOUT_SHARE = 0.05


def write_corpus(folder: Path, num_docs: int, seed: int = 0) -> dict:
    """Prepared-corpus shards of invented text: words drawn Zipf-like from the packaged tokenizer's whole-word
    vocabulary, 100-300 words a document."""
    from adapt.config.common import EncoderConfig
    from adapt.contracts.prepared_corpus import OUTPUT_SCHEMA, ShardWriter
    from adapt.training.encoder import load_tokenizer

    words = sorted(w for w in load_tokenizer(EncoderConfig()).get_vocab() if w.isalpha() and len(w) > 1)
    rng = random.Random(seed)
    weights = [1.0 / (rank + 1) for rank in range(len(words))]
    rng.shuffle(words)
    counts = {"train": num_docs, "heldout": max(1, int(num_docs * HELDOUT_SHARE))}
    for split, n in counts.items():
        writer = ShardWriter(folder / split, OUTPUT_SCHEMA, shard_docs=10_000)  # prepare's default shard size
        for i in range(n):
            text = " ".join(rng.choices(words, weights, k=rng.randint(100, 300))) + "."
            writer.add({"id": f"{split}-{i}", "text": text, "source": "generated", "quality": 1.0,
                        "cluster_id": i, "cluster_size": 1, "words": len(text.split())})
        writer.close()
    return {"train_docs": counts["train"], "heldout_docs": counts["heldout"],
            "corpus_mib": round(sum(f.stat().st_size for f in folder.rglob("*.parquet")) / 2**20, 1)}


def _pack_before(corpus_dir: str, split: str, tokenizer, cfg, key: str):
    """The data path before the token cache: all columns of every row as dicts, one Python list of token ids,
    then (N, T) int64 ids and mask (the mask tensor is kept alive, as it was)."""
    import torch

    from adapt.contracts.prepared_corpus import read_prepared
    from adapt.training.packing import PackedSequences

    docs = read_prepared(corpus_dir, split, columns=None)
    texts, t = [d["text"] for d in docs], cfg.encoder.max_seq_len
    body, stream = t - 2, []
    for start in range(0, len(texts), 512):
        for ids in tokenizer(texts[start:start + 512], add_special_tokens=False)["input_ids"]:
            if ids:
                stream.extend(ids)
                stream.append(tokenizer.sep_token_id)
    n = (len(stream) + body - 1) // body
    ids = torch.full((n, t), tokenizer.pad_token_id, dtype=torch.long)
    mask = torch.zeros((n, t), dtype=torch.long)
    flat = torch.tensor(stream, dtype=torch.long)
    for i in range(n):
        chunk = flat[i * body:(i + 1) * body]
        ids[i, 0], ids[i, 1:1 + len(chunk)], ids[i, 1 + len(chunk)] = tokenizer.cls_token_id, chunk, \
            tokenizer.sep_token_id
        mask[i, :2 + len(chunk)] = 1
    seqs = PackedSequences(ids.numpy(), 2 + len(chunk), len(texts))
    seqs.kept = (mask, docs if split == "heldout" else None)
    return seqs


def child(spec: dict) -> None:
    """One pretrain run in this process; prints its figures as JSON on the last line."""
    started = time.perf_counter()
    import transformers

    from adapt.config import compose_job
    from adapt.stages import pretrain
    from adapt.training import run_data, token_cache

    transformers.logging.set_verbosity_error()
    built, timed = [], {}
    build = token_cache._build
    token_cache._build = lambda *a, **k: built.append(a[0].name) or build(*a, **k)
    if spec["mode"] == "before":
        run_data._load_split = _pack_before
    load = pretrain.load_run_data

    def timed_load(*a, **k):
        t0 = time.perf_counter()
        data = load(*a, **k)
        timed["data_load_s"] = time.perf_counter() - t0
        return data

    pretrain.load_run_data = timed_load
    cfg = compose_job("pretrain", spec["overrides"])
    imported = time.perf_counter()
    result = pretrain.run(cfg)
    print(json.dumps({"step": result["step"], "splits_tokenised": len(built),
                      "data_load_s": round(timed["data_load_s"], 2),
                      "startup_imports_s": round(imported - started, 2),
                      "run_s": round(time.perf_counter() - imported, 2),
                      "peak_rss_mib": round(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024, 1)}))


def run_child(mode: str, overrides: list[str]) -> dict:
    env = {**os.environ, "HF_HUB_OFFLINE": "1", "TOKENIZERS_PARALLELISM": "true"}
    proc = subprocess.run([sys.executable, __file__, "--child", json.dumps({"mode": mode, "overrides": overrides})],
                          capture_output=True, text=True, env=env)
    if proc.returncode != 0:
        raise SystemExit(f"pretrain ({mode}) failed:\n{proc.stderr[-3000:]}")
    return json.loads(proc.stdout.strip().splitlines()[-1])


def measure(work: Path, docs: int, before: bool) -> dict:
    results = {}
    for scale in SCALES:
        corpus = work / f"corpus-{scale}x"
        info = write_corpus(corpus, docs * scale)
        common = [f"corpus_dir={corpus}", "debug=tiny", "runtime.progress=false", "checkpoint.save_every_steps=0"]
        out = work / f"run-{scale}x"
        info["first_run"] = run_child("cache", common + [f"out_dir={out}", "schedule.stop_after_steps=2"])
        info["resumed_run"] = run_child("cache", common + [f"out_dir={out}"])
        info["train_tokens"] = sum(json.loads(p.read_text())["num_tokens"]
                                   for p in (out / "token_cache").glob("train-*/meta.json"))
        info["cache_mib"] = round(sum(p.stat().st_size for p in (out / "token_cache").rglob("tokens.bin")) / 2**20, 1)
        if before:
            info["before_cache"] = run_child("before", common + [f"out_dir={work / f'before-{scale}x'}",
                                                                 "schedule.stop_after_steps=2"])
        results[f"{scale}x"] = info
    one, ten = results["1x"], results["10x"]
    ratio = lambda run: round(ten[run]["peak_rss_mib"] / one[run]["peak_rss_mib"], 3)
    summary = {"peak_rss_ratio_10x_over_1x": ratio("first_run"),
               "peak_rss_ratio_10x_over_1x_resumed": ratio("resumed_run"),
               "target_peak_rss_ratio": 1.2,
               "resumed_runs_tokenised_nothing": all(r["resumed_run"]["splits_tokenised"] == 0
                                                     for r in results.values())}
    if before:
        summary["peak_rss_ratio_10x_over_1x_before_cache"] = ratio("before_cache")
    return {"scales": results, "summary": summary}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--docs", type=int, default=5000, help="training documents at 1x")
    parser.add_argument("--skip-before", action="store_true", help="do not measure the pre-cache data path")
    parser.add_argument("--work-dir", help="keep corpora and runs here (default: a temporary folder)")
    parser.add_argument("--child", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        return child(json.loads(args.child))
    import torch

    with tempfile.TemporaryDirectory() as tmp:
        work = Path(args.work_dir or tmp)
        work.mkdir(parents=True, exist_ok=True)
        if any(work.iterdir()):
            raise SystemExit(f"--work-dir {work} is not empty; give an empty or new folder")
        report = measure(work, args.docs, not args.skip_before)
    report["machine"] = {"cpu_capability": torch.backends.cpu.get_cpu_capability(), "cores": os.cpu_count(),
                         "torch": torch.__version__}
    print(json.dumps(report, indent=2))


if __name__ == "__main__":
    main()
