"""Small output folders shaped like those of prepare, pretrain, score and compare, written through the same
writers the stages use (RunFolder, MetricsLog, atomic_write_json), for the report's unit tests."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from adapt.common.io import atomic_write_json, atomic_write_text
from adapt.config.report import ReportJob
from adapt.contracts.manifest import RunFolder
from adapt.contracts.run_folder import MetricsLog

LABELS = ["contract", "tenancy", "family"]
VOCAB_HASH = "ab" * 32


def write_prepared(path: Path, domain: str = "legal", status: str = "completed") -> Path:
    folder = RunFolder(path, "prepare", {"domain": domain}, [], 0)
    funnel = [{"stage": "read", "docs": 120, "words": 12000}, {"stage": "charset", "docs": 117, "words": 11800},
              {"stage": "near_duplicates", "docs": 100, "words": 10100}]
    atomic_write_json(path / "profile.json", {
        "inputs": {"inputs": ["raw/legal"]},
        "funnel": funnel,
        "removed": {"near_duplicate": {"count": 17, "examples": []}, "charset": {"count": 3, "examples": []}},
        "duplicates": {"docs_checked": 117, "exact_duplicates": 5, "near_duplicates": 12, "clusters": 100,
                       "duplicate_share": 17 / 117, "method": {"ngram_words": 3, "threshold": 0.6}},
        "personal_data": {"mode": "redact", "findings": {"email": 4, "iban": 1}, "docs_with_findings": 3,
                          "docs_dropped": 0},
        "contamination": {"task_dir": "tasks/legal", "action": "remove", "removed_docs": 1,
                          "splits": {"test": {"task_texts": 30, "found_in_corpus": 1, "found_share": 1 / 30}}},
        "tokenizer": {"encoder": "tiny", "corpus": {"docs": 100, "words": 10100, "tokens": 13130, "fertility": 1.3,
                                                    "unknown_rate": 0.0}},
        "unigram_overlap": {"top_n": 10000, "overlap": 0.4, "shared": 400, "corpus_only_examples": ["tenant"]},
        "totals": {"docs_read": 120, "words_read": 12000, "docs_kept": 100, "words_kept": 10100,
                   "docs_removed": 20},
        "warnings": ["clinical corpus: check it"] if domain == "clinical" else [],
    })
    folder.finish(status)
    return path


def write_pretrain(path: Path, status: str = "completed", steps: int = 6) -> Path:
    folder = RunFolder(path, "pretrain", {"encoder": {"name_or_path": "tiny"}, "schedule": {"max_steps": steps},
                                          "runtime": {"precision": "auto"}, "adapter": {"kind": "full"}}, [], 0)
    log = MetricsLog(path / "metrics.jsonl")
    log.write(phase="head_warmup", steps=12, epochs=2, first_loss=5.0, last_loss=4.0, converged=True,
              heldout_losses=[5.0, 4.5, 4.0])
    log.write(phase="start", step=0, heldout_loss_domain=4.0, heldout_loss_general=4.2)
    done = steps if status == "completed" else steps // 2
    for step in range(1, done + 1):
        record = {"phase": "train", "step": step, "loss": 4.0 - 0.1 * step,
                  "learning_rate": 1e-4 * (1 - step / steps), "tokens_seen": 256 * step, "tokens_per_second": 1000.0}
        if step % 2 == 0:
            record["heldout_loss_domain"] = 4.0 - 0.05 * step
        log.write(**record)
    if status == "completed":
        log.write(phase="end", step=steps, heldout_loss_domain=3.6, heldout_loss_general=4.1)
        atomic_write_json(path / "result.json", {
            "step": steps, "completed": True, "tokens_seen": 256 * steps, "trainable_parameters": 1000,
            "total_parameters": 1200, "start": {"heldout_loss_domain": 4.0, "heldout_loss_general": 4.2},
            "end": {"heldout_loss_domain": 3.6, "heldout_loss_general": 4.1}})
    folder.finish(status, step=done)
    return path


def per_document(n: int, seed: int, shift: float) -> list[dict]:
    rng = np.random.default_rng(seed)
    tokens = rng.integers(20, 60, size=n)
    return [{"id": f"d{i}", "tokens": int(t), "pll": float(-t * (3.0 + shift + rng.normal(0, 0.3))), "cut": False}
            for i, t in enumerate(tokens)]


def write_score(path: Path, encoder: Path, texts: Path, docs: list[dict], vocab_hash: str = VOCAB_HASH) -> Path:
    folder = RunFolder(path, "score", {}, [], 0)
    pll = sum(d["pll"] for d in docs)
    tokens = sum(d["tokens"] for d in docs)
    pppl = float(np.exp(-pll / tokens))
    atomic_write_json(path / "scores.json", {
        "encoder": str(encoder), "texts": str(texts), "split": "heldout", "variant": "token",
        "pseudo_perplexity": pppl,
        "ci": {"confidence": 0.95, "low": pppl * 0.9, "high": pppl * 1.1, "bootstrap_resamples": 100},
        "total_tokens": tokens, "n_docs": len(docs), "tokens_per_second": 50.0, "max_seq_len": 64,
        "precision": "fp32", "tokenizer_vocab_sha256": vocab_hash, "per_document": docs})
    folder.finish()
    return path


def write_compare(path: Path, status: str = "completed") -> Path:
    folder = RunFolder(path, "compare", {}, [], 0)
    gold = [LABELS[i % 3] for i in range(12)]
    preds = {"base": [gold[:], gold[:6] + ["contract"] * 6], "adapted": [gold[:], gold[:]], "tfidf": [gold[:]]}
    lines = [json.dumps({"index": i, "gold": g, "predicted": {a: [run[i] for run in runs] for a, runs in preds.items()}})
             for i, g in enumerate(gold)]
    atomic_write_text(path / "predictions.jsonl", "\n".join(lines) + "\n")

    def stat(values):
        return {"n": len(values), "mean": float(np.mean(values)),
                "sd": float(np.std(values, ddof=1)) if len(values) > 1 else None,
                "ci_low": float(min(values)) if len(values) > 1 else None,
                "ci_high": float(max(values)) if len(values) > 1 else None}

    arms = {}
    for arm, scores in {"base": [0.80, 0.70], "adapted": [0.90, 0.86], "tfidf": [0.75]}.items():
        arms[arm] = {"checkpoint": arm, "per_seed": [{"seed": i, "test_accuracy": s, "test_macro_f1": s - 0.01,
                                                      "seconds": 2.0} for i, s in enumerate(scores)],
                     "test_accuracy": stat(scores), "test_macro_f1": stat([s - 0.01 for s in scores])}
    boot = {m: {"difference": 0.13, "ci_low": 0.05, "ci_high": 0.21, "p_better": 0.001, "p_worse": 0.999}
            for m in ("accuracy", "macro_f1")}
    atomic_write_json(path / "comparison.json", {
        "task": {"dir": "tasks/legal", "labels": LABELS, "sizes": {"train": 30, "dev": 10, "test": 12}},
        "seeds": [0, 1], "confidence": 0.95, "reference_arm": "base", "arms": arms,
        "tests": {"adapted vs base": {"arm": "adapted", "reference": "base", "n_examples": 12, "n_seeds": 2,
                                      "bootstrap": boot,
                                      "permutation": {m: {"p_better": 0.01, "p_worse": 0.99} for m in boot},
                                      "mcnemar_majority_vote": {"p_value": 0.03}}},
        "verdict": {"adapted vs base": {"pair": "adapted vs base", "outcome": "adapted better", "metric": "macro_f1",
                                        "difference": 0.13, "ci_low": 0.05, "ci_high": 0.21, "confidence": 0.95,
                                        "text": "adapted better (adapted vs base)", "cautions": ["only 2 seed(s)"]}},
        "caution": "These are research measurements on a benchmark task, not legal or medical advice."})
    folder.finish(status)
    return path


def write_all(root: Path, pretrain_status: str = "completed", compare_status: str = "completed") -> ReportJob:
    """A full set of folders under ``root`` and the report config that reads them."""
    prepared = write_prepared(root / "prepared")
    general = write_prepared(root / "general", domain="general")
    run = write_pretrain(root / "pretrain", status=pretrain_status)
    docs = per_document(40, seed=1, shift=0.0)
    adapted = [{**d, "pll": d["pll"] * 0.9} for d in docs]  # adapted: 10% higher log-likelihood per document
    for arm, sub, these in (("base", "base", docs), ("adapted", "final", adapted)):
        write_score(root / "score" / f"{arm}-domain", run / sub, prepared, these)
    write_compare(root / "compare", status=compare_status)
    return ReportJob(prepared_dir=str(prepared), general_dir=str(general), pretrain_dir=str(run),
                     score_dirs=[str(root / "score")], compare_dir=str(root / "compare"),
                     out_dir=str(root / "report"))
