"""Collects the prepare stage's numbers into ``profile.json`` and renders ``profile.md`` and the summary lines.

Examples of removed documents are always passed through the personal-data redactor and truncated, whatever
``privacy.mode`` is, so the profile itself never spreads the personal data it reports on.
"""

from __future__ import annotations

import logging
from collections import Counter
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

from adapt.config.prepare import PRIVACY_KINDS, PrepareJob
from adapt.corpus import charsets, privacy
from adapt.common.io import atomic_write_with
from adapt.corpus.docwork import FILTER_STAGES, STAGES, ChunkResult

log = logging.getLogger(__name__)


def _redacted(text: str) -> str:
    return privacy.redact(text, privacy.find_personal_data(text, PRIVACY_KINDS))


class ProfileBuilder:
    def __init__(self, cfg: PrepareJob):
        self.cfg = cfg
        self.counts: Counter = Counter()
        self.reasons: Counter = Counter()
        self.examples: dict[str, list[dict]] = {}
        self.removed_rows: list[tuple[str, str, str, str]] = []
        self.funnel = {s: [0, 0] for s in STAGES}
        self.bad_chars: Counter = Counter()
        self.wrong_languages: Counter = Counter()
        self.boilerplate_examples: Counter = Counter()
        self.quality_scores: list[float] = []
        self.quality_by_source: Counter = Counter()
        self.warnings: list[str] = []
        self.profile: dict = {}

    def warn(self, message: str) -> None:
        self.warnings.append(message)
        log.warning(message)

    def funnel_add(self, stage: str, docs: int, words: int) -> None:
        self.funnel[stage][0] += docs
        self.funnel[stage][1] += words

    def remove(self, row: dict) -> None:
        reason = row["reason"]
        self.reasons[reason] += 1
        self.removed_rows.append((row["id"], reason, row["detail"], row["source"]))
        shown = self.examples.setdefault(reason, [])
        if len(shown) < self.cfg.profile.examples_per_reason:
            text = _redacted(row["text"])
            limit = self.cfg.profile.example_chars
            text = " ".join(text.split())
            shown.append({"id": row["id"], "source": row["source"], "detail": row["detail"],
                          "text": text[:limit] + ("…" if len(text) > limit else "")})

    def merge_chunk(self, res: ChunkResult) -> None:
        for row in res.removed:
            self.remove(row)
        for stage in FILTER_STAGES:
            self.funnel_add(stage, res.reached[stage], res.words[stage])
        self.counts.update(res.counts)
        self.bad_chars.update(res.bad_chars)
        self.wrong_languages.update(res.wrong_languages)
        self.boilerplate_examples.update(res.boilerplate_examples)
        self.quality_scores += res.quality_scores
        self.quality_by_source.update(res.quality_by_source)

    def read_report(self, stats, files: list) -> None:  # noqa: ANN001 - readers.ReadStats
        self.funnel["read"][0] = stats.docs_read
        self.profile["inputs"] = {
            "inputs": list(self.cfg.inputs), "files": len(files), "files_read": stats.files_read,
            "files_skipped": dict(stats.files_skipped), "fallback_encoding": self.cfg.read.fallback_encoding,
            "fallback_decoded": dict(stats.fallback_decoded), "docs_read": stats.docs_read,
            "empty_records": stats.empty_records, "ids_made_unique": stats.ids_made_unique}
        if stats.files_skipped:
            self.warn(f"skipped {len(stats.files_skipped)} file(s): "
                      + "; ".join(f"{k} ({v})" for k, v in list(stats.files_skipped.items())[:3]))

    def quality_report(self, model) -> None:  # noqa: ANN001 - quality.QualityModel (imports scikit-learn)
        self.profile["quality"] = dict(model.report, min_score=self.cfg.quality.min_score)
        if model.kind == "heuristic":
            self.warn("quality: no gold set (quality.gold_path=null); documents are scored and filtered by a "
                      "transparent heuristic (share of simple rules passed), not by a trained classifier")

    def dedup_report(self, clusters, n: int, cfg: PrepareJob) -> None:  # noqa: ANN001 - dedup.Clusters
        dup = clusters.exact_duplicates + clusters.near_duplicates
        d = cfg.dedup
        self.profile["duplicates"] = {
            "docs_checked": n, "exact_duplicates": clusters.exact_duplicates,
            "near_duplicates": clusters.near_duplicates, "clusters": clusters.num_clusters,
            "duplicate_share": dup / n if n else 0.0, "candidate_pairs": clusters.candidate_pairs,
            "verified_pairs": clusters.verified_pairs, "removed": bool(d.remove),
            "method": {"ngram_words": d.ngram_words, "num_hashes": d.num_hashes, "bands": d.bands,
                       "rows_per_band": d.num_hashes // d.bands, "threshold": d.threshold,
                       "exact": d.exact, "near": d.near},
            "reference": "Lee et al. 2022 found 3-14% near-duplicates in common web-text corpora"}

    def finish(self, seconds: float, out: Path) -> None:
        cfg = self.cfg
        scores = np.array(self.quality_scores)
        hist, edges = np.histogram(scores, bins=10, range=(0.0, 1.0))
        self.profile["quality"].update(
            scored_docs=int(scores.size), removed=self.reasons["low_quality"],
            score_histogram=[{"from": round(float(lo), 2), "to": round(float(hi), 2), "docs": int(c)}
                             for lo, hi, c in zip(edges[:-1], edges[1:], hist)])
        self._quality_concentration()
        self.profile["cleaning"] = {
            "control_chars_removed": self.counts["control_chars_removed"],
            "mojibake_repairs": self.counts["mojibake_repairs"], "docs_with_markup": self.counts["docs_with_markup"],
            "boilerplate": {"distinct_lines": self.counts["boilerplate_distinct_lines"],
                            "lines_removed": self.counts["boilerplate_lines_removed"],
                            "docs_affected": self.counts["docs_with_boilerplate"],
                            "examples": [{"line": _redacted(ln)[:120], "seen": n}
                                         for ln, n in self.boilerplate_examples.most_common(5)]}}
        self.profile["charset"] = {
            "language": cfg.charset.language, "max_disallowed_share": cfg.charset.max_disallowed_share,
            "removed": self.reasons["charset"],
            "top_disallowed": [{"char": c, "name": charsets.describe_char(c), "count": n}
                               for c, n in self.bad_chars.most_common(10)]}
        checked = self.funnel["min_words"][0]  # documents that reached the language check
        li = cfg.language_id
        self.profile["language_id"] = {
            "language": cfg.charset.language, "min_probability": li.min_probability, "sample_chars": li.sample_chars,
            "checked": checked if li.min_probability > 0 else 0,
            "passed_precheck": self.counts["language_prechecked"], "removed": self.reasons["wrong_language"],
            "removed_share": self.reasons["wrong_language"] / checked if checked and li.min_probability > 0 else 0.0,
            "identified_as": dict(self.wrong_languages.most_common()),
            "method": "py3langid (langid.py model, Lui & Baldwin 2012; 97 languages)"}
        findings = {k: self.counts[f"pii_{k}"] for k in cfg.privacy.kinds}
        self.profile["personal_data"] = {"mode": cfg.privacy.mode, "kinds": list(cfg.privacy.kinds),
                                         "findings": findings if cfg.privacy.mode != "off" else None,
                                         "docs_with_findings": self.counts["docs_with_pii"],
                                         "docs_dropped": self.reasons["personal_data"]}
        self._privacy_warnings()
        self.profile.setdefault("contamination", None)
        self.profile["funnel"] = [{"stage": s, "docs": v[0], "words": v[1]} for s, v in self.funnel.items()]
        self.profile["removed"] = {r: {"count": n, "examples": self.examples.get(r, [])}
                                   for r, n in self.reasons.most_common()}
        split = self.profile["split"]
        self.profile["totals"] = {
            "docs_read": self.funnel["read"][0], "words_read": self.funnel["read"][1],
            "docs_kept": split["train_docs"] + split["heldout_docs"],
            "words_kept": split["train_words"] + split["heldout_words"],
            "docs_removed": sum(self.reasons.values()), "seconds": round(seconds, 2), "out_dir": str(out)}
        self.profile["warnings"] = self.warnings

    def _quality_concentration(self) -> None:
        """Warn when the quality filter removes a large share of one source: the gold set may not represent
        that kind of text (structured notes often look like tables or menus to a generic classifier)."""
        hot = []
        for (source, what), n in sorted(self.quality_by_source.items()):
            if what != "scored" or n < 10:
                continue
            removed = self.quality_by_source[(source, "removed")]
            if removed / n > 0.1:
                hot.append({"source": source, "scored": n, "removed": removed})
        self.profile["quality"]["sources_hit_hard"] = hot
        if hot:
            worst = max(hot, key=lambda h: h["removed"] / h["scored"])
            self.warn(f"quality filter removed more than 10% of {len(hot)} source(s), e.g. {worst['removed']} of "
                      f"{worst['scored']} documents of {worst['source']}; check the low_quality examples, add such "
                      "documents to the gold set or lower quality.min_score")

    def _privacy_warnings(self) -> None:
        cfg = self.cfg
        if cfg.domain == "clinical" and cfg.privacy.mode == "off":
            log.warning(privacy.CLINICAL_BANNER)
            self.warnings.append("domain=clinical with privacy.mode=off: the corpus was NOT scanned for personal "
                                 "data; set privacy.mode=redact")
        if cfg.domain == "clinical":
            self.warnings.append(privacy.CLINICAL_CAUTION)

    def write_removed(self, path: Path, schema: pa.Schema) -> None:
        cols = list(zip(*self.removed_rows)) if self.removed_rows else [[], [], [], []]
        table = pa.table({name: list(col) for name, col in zip(schema.names, cols)}, schema=schema)
        atomic_write_with(path, lambda tmp: pq.write_table(table, str(tmp)))

    def markdown(self) -> str:
        from adapt.corpus.profile_markdown import render_markdown

        return render_markdown(self.profile)


def _pct(x: float | None) -> str:
    return "n/a" if x is None else f"{100 * x:.1f}%"


def summary_lines(p: dict, out: Path) -> list[str]:
    t, inp, s = p["totals"], p["inputs"], p["split"]
    lines = [f"read {t['docs_read']:,} documents ({t['words_read']:,} words) from {inp['files_read']} file(s)"
             + (f"; skipped {len(inp['files_skipped'])} file(s)" if inp["files_skipped"] else "")
             + (f"; {sum(inp['fallback_decoded'].values())} record(s) decoded as {inp['fallback_encoding']}"
                if inp["fallback_decoded"] else "")]
    removed = ", ".join(f"{r} {v['count']:,}" for r, v in p["removed"].items()) or "none"
    lines.append(f"removed {t['docs_removed']:,}: {removed}")
    li = p["language_id"]
    if li["min_probability"] > 0:
        seen = ", ".join(f"{k} {n:,}" for k, n in list(li["identified_as"].items())[:5])
        lines.append(f"language: {li['removed']:,} of {li['checked']:,} documents ({_pct(li['removed_share'])}) "
                     f"identified as another language than {li['language']} with p >= {li['min_probability']}"
                     + (f" ({seen})" if seen else ""))
    else:
        lines.append("language: not checked (language_id.min_probability=0)")
    b = p["cleaning"]["boilerplate"]
    lines.append(f"boilerplate: {b['distinct_lines']} repeated line(s), {b['lines_removed']:,} removed from "
                 f"{b['docs_affected']:,} documents; markup in {p['cleaning']['docs_with_markup']:,} documents")
    d = p["duplicates"]
    lines.append(f"duplicates: {d['exact_duplicates'] + d['near_duplicates']:,} of {d['docs_checked']:,} "
                 f"({_pct(d['duplicate_share'])}; exact {d['exact_duplicates']:,}, near {d['near_duplicates']:,})")
    pd = p["personal_data"]
    if pd["findings"] is not None:
        found = ", ".join(f"{k} {n:,}" for k, n in pd["findings"].items() if n) or "none found"
        lines.append(f"personal data ({pd['mode']}): {found} in {pd['docs_with_findings']:,} documents")
    else:
        lines.append("personal data: not scanned (privacy.mode=off)")
    q = p["quality"]
    if q["kind"] == "classifier":
        lines.append(f"quality: classifier CV accuracy {q['cv_accuracy']:.3f} ± {q['cv_accuracy_std']:.3f} vs "
                     f"majority baseline {q['majority_baseline_accuracy']:.3f} ({sum(q['gold_counts'].values())} "
                     f"gold examples); {q['removed']:,} below {q['min_score']}")
    else:
        lines.append(f"quality: heuristic score (no gold set); {q['removed']:,} below {q['min_score']}")
    c = p.get("contamination")
    if c:
        parts = [f"{k} {v['found_in_corpus']}/{v['task_texts']}" for k, v in c["splits"].items()]
        lines.append(f"contamination: task texts found in corpus: {', '.join(parts)}; "
                     f"{c['removed_docs']} document(s) removed ({c['action']})")
    tk, ov = p["tokenizer"], p.get("unigram_overlap")
    fert = f"fertility {tk['corpus']['fertility'] or 0:.2f} tokens/word"
    if tk["general"]:
        fert += f" (general text {tk['general']['fertility'] or 0:.2f})"
    if ov:
        fert += f"; top-{ov['compared']:,} unigram overlap with general text {_pct(ov['overlap'])}"
    lines.append(f"tokenizer: {fert}; unknown tokens {_pct(tk['corpus']['unknown_rate'])}")
    lines.append(f"kept {t['docs_kept']:,} documents ({t['words_kept']:,} words): train {s['train_docs']:,} -> "
                 f"{out / 'train'}, heldout {s['heldout_docs']:,} -> {out / 'heldout'} (split by cluster)")
    lines.append(f"profile: {out / 'profile.md'}; removed list: {out / 'removed.parquet'}; {t['seconds']:.1f} s")
    lines += [f"WARNING: {w}" for w in p["warnings"]]
    return lines
