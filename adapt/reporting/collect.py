"""Gather every number a report shows from the output folders into one JSON-able dict.

Each folder is checked first (``sources``): a folder that is not this tool's output is refused with one line; a
run that did not complete is marked, and its part of the report says so. Fields a file does not hold read as None
and print as missing. Nothing here draws or formats; ``html`` and ``markdown`` render the dict.
"""

from __future__ import annotations

import datetime as _dt
from pathlib import Path
from typing import Any

from adapt import __version__
from adapt.config.common import optional_str
from adapt.config.report import ReportJob
from adapt.contracts.manifest import session_seconds
from adapt.contracts.run_folder import METRICS, MetricsLog
from adapt.reporting import results
from adapt.reporting.sources import Source, expand_score_dirs, open_source, read_json_file
from adapt.reporting.values import dig, number

REPORT_FORMAT = 1  # version of the report.json layout


class Collected:
    """The sources opened and every file read (the report's manifest hashes them)."""

    def __init__(self) -> None:
        self.sources: list[Source] = []
        self.files_read: list[Path] = []

    def read(self, src: Source, name: str) -> Any:
        path = src.path / name
        if not path.is_file():
            return None
        self.files_read.append(path)
        return read_json_file(path, src.key)

    def section(self, src: Source, name: str, rerun: str) -> tuple[dict[str, Any], dict | None]:
        """A section's head and the JSON file ``name`` of ``src``; None (the head marked missing) without it."""
        out: dict[str, Any] = src.section_head()
        if not src.usable:
            return out, None
        data = self.read(src, name)
        if not isinstance(data, dict):
            out.update(state="missing", note=f"{src.path}/{name} is missing; {rerun}")
            return out, None
        return out, data


def collect(cfg: ReportJob) -> tuple[dict[str, Any], list[Path]]:
    """The report's numbers, and the files they came from."""
    c = Collected()
    prepared = open_source("prepared", "prepared_dir", "prepare", optional_str(cfg.prepared_dir))
    general = open_source("general", "general_dir", "prepare", optional_str(cfg.general_dir))
    vocab = open_source("vocab", "vocab_dir", "vocab", optional_str(cfg.vocab_dir))
    pretrain = open_source("pretrain", "pretrain_dir", "pretrain", optional_str(cfg.pretrain_dir))
    audit = open_source("canary", "canary_dir", "canary", optional_str(cfg.canary_dir))
    scores = [open_source("score", "score_dirs", "score", d) for d in expand_score_dirs(list(cfg.score_dirs))]
    compare = open_source("compare", "compare_dir", "compare", optional_str(cfg.compare_dir))
    # the vocab and canary stages are optional: their folders are listed only when given
    c.sources = [prepared, general, *([vocab] if vocab.path else []), pretrain, *([audit] if audit.path else []),
                 *(scores or [open_source("score", "score_dirs", "score", None)]), compare]

    corpus = {"domain": corpus_section(c, prepared), "general": corpus_section(c, general),
              "vocab": vocab_section(c, vocab)}
    training = training_section(c, pretrain)
    pppl = results.pppl_section(c, scores, cfg, pretrain, prepared, general)
    downstream = results.downstream_section(c, compare)
    report = {
        "format": REPORT_FORMAT,
        "title": cfg.title or "Domain adaptation report",
        "generated": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        "tool_version": __version__,
        "sources": [s.describe() for s in c.sources],
        "question": results.question(corpus, training, downstream),
        "verdict": results.headline(downstream, pppl),
        "corpus": corpus,
        "training": training,
        "memorisation": canary_section(c, audit),
        "pppl": pppl,
        "downstream": downstream,
        "cost": results.cost_section(training, downstream, pppl),
        "provenance": [provenance(s) for s in c.sources if s.manifest],
        "cautions": results.cautions(corpus, pppl, downstream),
    }
    return report, c.files_read


def corpus_section(c: Collected, src: Source) -> dict[str, Any]:
    """What prepare kept and removed, and why: from ``profile.json``."""
    out, profile = c.section(src, "profile.json", "rerun adapt-prepare")
    if profile is None:
        return out
    funnel = [{"stage": r.get("stage"), "docs": number(r.get("docs")), "words": number(r.get("words"))}
              for r in profile.get("funnel") or [] if isinstance(r, dict)]
    removed = {reason: dig(v, "count") if isinstance(v, dict) else v
               for reason, v in (profile.get("removed") or {}).items()}
    contamination = profile.get("contamination") if isinstance(profile.get("contamination"), dict) else {}
    out.update({
        "domain": dig(src.manifest, "config", "domain"),
        "inputs": dig(profile, "inputs", "inputs"),
        "totals": profile.get("totals") or {},
        "funnel": funnel,
        "removed": dict(sorted(((k, number(v)) for k, v in removed.items()), key=lambda kv: -(kv[1] or 0))),
        "duplicates": {k: dig(profile, "duplicates", k) for k in
                       ("docs_checked", "exact_duplicates", "near_duplicates", "duplicate_share", "clusters")}
        | {"threshold": dig(profile, "duplicates", "method", "threshold"),
           "ngram_words": dig(profile, "duplicates", "method", "ngram_words")},
        "personal_data": {"mode": dig(profile, "personal_data", "mode"),
                          "findings": dig(profile, "personal_data", "findings") or {},
                          "docs_with_findings": dig(profile, "personal_data", "docs_with_findings"),
                          "docs_dropped": dig(profile, "personal_data", "docs_dropped")},
        "contamination": {"task_dir": contamination.get("task_dir"), "action": contamination.get("action"),
                          "removed_docs": contamination.get("removed_docs"),
                          "splits": {s: {k: dig(v, k) for k in ("task_texts", "found_in_corpus", "found_share")}
                                     for s, v in (contamination.get("splits") or {}).items()}},
        "tokenizer": {"encoder": dig(profile, "tokenizer", "encoder"),
                      "corpus": dig(profile, "tokenizer", "corpus") or {},
                      "general": dig(profile, "tokenizer", "general") or {}},
        "overlap": {k: dig(profile, "unigram_overlap", k) for k in
                    ("top_n", "overlap", "shared", "corpus_distinct_words", "general_distinct_words",
                     "corpus_only_examples")},
        "split": {k: dig(profile, "split", k) for k in ("train_docs", "heldout_docs", "train_words",
                                                         "heldout_words")},
        "quality": {k: dig(profile, "quality", k) for k in ("kind", "cv_accuracy", "majority_baseline_accuracy",
                                                             "removed")},
        "warnings": [str(w) for w in profile.get("warnings") or []],
    })
    return out


def vocab_section(c: Collected, src: Source, shown_words: int = 15) -> dict[str, Any]:
    """The words adapt-vocab added and the fertility before and after: from ``vocab_report.json``."""
    out, rep = c.section(src, "vocab_report.json", "rerun adapt-vocab")
    if rep is None:
        return out
    out.update({
        "encoder": rep.get("encoder"), "added_count": number(rep.get("added_count")),
        "base_vocab_size": number(rep.get("base_vocab_size")), "vocab_size": number(rep.get("vocab_size")),
        "fertility": rep.get("fertility") if isinstance(rep.get("fertility"), dict) else {},
        "left_out": rep.get("left_out") if isinstance(rep.get("left_out"), dict) else {},
        "top_words": [{k: w.get(k) for k in ("word", "count", "docs", "pieces", "tokens_saved")}
                      for w in (rep.get("added") or [])[:shown_words] if isinstance(w, dict)],
    })
    return out


def canary_section(c: Collected, src: Source) -> dict[str, Any]:
    """The memorisation audit: exposure per repeat count, from ``exposure.json``."""
    out, rep = c.section(src, "exposure.json", "rerun adapt-canary mode=audit (a mode=plant folder has none)")
    if rep is None:
        return out
    rows = [r for r in rep.get("canaries") or [] if isinstance(r, dict)]
    by_repeat = rep.get("mean_exposure_by_repeats") if isinstance(rep.get("mean_exposure_by_repeats"), dict) else {}
    out.update({"encoder": rep.get("encoder"), "max_exposure": number(rep.get("max_exposure")),
                "by_repeats": [{"repeats": int(r), "canaries": sum(1 for x in rows if x.get("repeats") == int(r)),
                                "mean_exposure": number(v)} for r, v in by_repeat.items()],
                "reading": rep.get("reading")})
    return out


def precision_of(manifest: dict) -> dict[str, Any]:
    """The precision a run used: the manifest's record when it has one, else the configured request."""
    rec = manifest.get("precision")
    if isinstance(rec, dict):
        return {"chosen": rec.get("chosen"), "requested": rec.get("requested"), "reason": rec.get("reason")}
    if isinstance(rec, str):
        return {"chosen": rec, "requested": None, "reason": None}
    return {"chosen": None, "requested": dig(manifest, "config", "runtime", "precision"), "reason": None}


def _last_per_step(records: list[dict], phase: str) -> list[dict]:
    """Records of one phase, the last one per step (a resumed run repeats the steps after its checkpoint)."""
    by_step: dict[Any, dict] = {}
    for r in records:
        if r.get("phase") == phase:
            by_step[r.get("step")] = r
    return [by_step[s] for s in sorted(by_step, key=lambda s: (s is None, s if s is not None else 0))]


def training_section(c: Collected, src: Source) -> dict[str, Any]:
    """Curves and totals of the pretrain run: ``metrics.jsonl``, ``result.json`` and the manifest."""
    out: dict[str, Any] = src.section_head()
    if src.state not in ("read", "incomplete"):
        return out
    log_path = src.path / METRICS
    records = [r for r in MetricsLog(log_path).read() if isinstance(r, dict)]  # a torn last line is skipped
    if log_path.is_file():
        c.files_read.append(log_path)
    train = _last_per_step(records, "train")
    evals = [r for r in _last_per_step(records, "start") + train + _last_per_step(records, "end")
             if any(k.startswith("heldout_loss_") for k in r)]
    sets = sorted({k[len("heldout_loss_"):] for r in evals for k in r if k.startswith("heldout_loss_")})
    warm = [r for r in records if r.get("phase") == "head_warmup"]
    result = c.read(src, "result.json") if src.usable else None
    result = result if isinstance(result, dict) else {}
    cfg = src.manifest.get("config") or {}
    out.update({
        "steps": [r.get("step") for r in train],
        "train_loss": [number(r.get("loss")) for r in train],
        "learning_rate": [number(r.get("learning_rate")) for r in train],
        "tokens_per_second": [number(r.get("tokens_per_second")) for r in train],
        "heldout": {name: [[r.get("step"), number(r.get(f"heldout_loss_{name}"))] for r in evals
                           if number(r.get(f"heldout_loss_{name}")) is not None] for name in sets},
        # held-out loss before the fit and after each epoch (run folders from before the cached fit: "losses")
        "head_warmup": {"losses": [number(v) for v in dig(warm[-1], "heldout_losses") or dig(warm[-1], "losses")
                                   or []],
                        "converged": warm[-1].get("converged"), "steps": warm[-1].get("steps"),
                        "epochs": warm[-1].get("epochs")} if warm else None,
        "start": result.get("start") or _figures(_last_per_step(records, "start")),
        "end": result.get("end") or _figures(_last_per_step(records, "end")),
        "step": result.get("step", train[-1].get("step") if train else None),
        "max_steps": dig(cfg, "schedule", "max_steps"),
        "tokens_seen": result.get("tokens_seen", train[-1].get("tokens_seen") if train else None),
        "trainable_parameters": result.get("trainable_parameters"),
        "total_parameters": result.get("total_parameters"),
        "wall_seconds": session_seconds(src.manifest),
        "precision": precision_of(src.manifest),
        "encoder": dig(cfg, "encoder", "name_or_path"),
        "adapter": dig(cfg, "adapter", "kind"),
        "batch": {"batch_size": dig(cfg, "schedule", "batch_size"),
                  "grad_accum_steps": dig(cfg, "schedule", "grad_accum_steps"),
                  "max_seq_len": dig(cfg, "encoder", "max_seq_len")},
        "masking_rate": dig(cfg, "masking", "rate"),
        "corpus_dir": cfg.get("corpus_dir"),
    })
    return out


def _figures(records: list[dict]) -> dict[str, Any]:
    return {k: v for k, v in records[-1].items() if k.startswith(("heldout_", "pppl_"))} if records else {}


def provenance(src: Source) -> dict[str, Any]:
    m = src.manifest
    inputs = m.get("inputs") if isinstance(m.get("inputs"), dict) else {}
    return {"role": src.role, "path": str(src.path), "job": m.get("job"), "tool_version": m.get("tool_version"),
            "status": m.get("status"), "started": m.get("started"), "ended": m.get("ended"), "host": m.get("host"),
            "platform": m.get("platform"), "python": m.get("python"), "seed": m.get("seed"),
            "precision": precision_of(m), "inputs": inputs, "config": m.get("config")}
