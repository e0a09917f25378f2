"""Downstream figures the report derives from a compare folder: arm summaries from ``comparison.json``, and
per-class F1 and confusion matrices recomputed from ``predictions.jsonl`` (gold label and every arm's prediction per
seed) with scikit-learn, over the task's full label set.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from adapt.reporting.values import dig, number


def arm_rows(comparison: dict) -> list[dict[str, Any]]:
    """One row per arm: mean, sd and interval of each test metric over seeds, and the per-seed scores."""
    rows = []
    arms = comparison.get("arms") if isinstance(comparison.get("arms"), dict) else {}
    for arm, rec in arms.items():
        if not isinstance(rec, dict):
            continue
        per_seed = [r for r in rec.get("per_seed") or [] if isinstance(r, dict)]
        row: dict[str, Any] = {"arm": arm, "checkpoint": rec.get("checkpoint"), "n_runs": len(per_seed),
                               "per_seed": [{"seed": r.get("seed"), "test_accuracy": number(r.get("test_accuracy")),
                                             "test_macro_f1": number(r.get("test_macro_f1")),
                                             "selected_epoch": r.get("selected_epoch"),
                                             "seconds": number(r.get("seconds"))} for r in per_seed]}
        for metric in ("test_accuracy", "test_macro_f1"):
            stat = rec.get(metric) if isinstance(rec.get(metric), dict) else {}
            row[metric] = {k: number(stat.get(k)) for k in ("mean", "sd", "ci_low", "ci_high")}
            row[metric]["n"] = stat.get("n")
        rows.append(row)
    return rows


def test_rows(comparison: dict) -> list[dict[str, Any]]:
    """One row per paired test and metric: difference, bootstrap CI and p, permutation p, McNemar."""
    rows = []
    tests = comparison.get("tests") if isinstance(comparison.get("tests"), dict) else {}
    for pair, t in tests.items():
        if not isinstance(t, dict):
            continue
        boot = t.get("bootstrap") if isinstance(t.get("bootstrap"), dict) else {}
        for metric in boot:
            rows.append({"pair": pair, "metric": metric,
                         "difference": number(dig(boot, metric, "difference")),
                         "ci_low": number(dig(boot, metric, "ci_low")),
                         "ci_high": number(dig(boot, metric, "ci_high")),
                         "bootstrap_p_better": number(dig(boot, metric, "p_better")),
                         "permutation_p_better": number(dig(t, "permutation", metric, "p_better")),
                         "permutation_p_worse": number(dig(t, "permutation", metric, "p_worse")),
                         "mcnemar_p": number(dig(t, "mcnemar_majority_vote", "p_value")),
                         "n_examples": t.get("n_examples"), "n_seeds": t.get("n_seeds")})
    return rows


def per_class(predictions: list[dict], labels: list[str]) -> dict[str, Any]:
    """Per arm: F1 of every label (mean and sd over seeds) and the confusion matrix summed over seeds."""
    from sklearn.metrics import confusion_matrix, f1_score

    if not predictions or not labels:
        return {}
    gold = [str(p.get("gold")) for p in predictions]
    arms = predictions[0].get("predicted") if isinstance(predictions[0].get("predicted"), dict) else {}
    out: dict[str, Any] = {}
    for arm in arms:
        runs = _runs_of(predictions, arm)
        if not runs:
            continue
        f1 = np.array([f1_score(gold, run, labels=labels, average=None, zero_division=0) for run in runs])
        matrix = sum(confusion_matrix(gold, run, labels=labels) for run in runs)
        out[arm] = {"labels": labels, "n_runs": len(runs),
                    "f1_mean": [float(v) for v in f1.mean(axis=0)],
                    "f1_sd": [float(v) for v in f1.std(axis=0, ddof=1)] if len(runs) > 1 else None,
                    "support": [int(gold.count(lab)) for lab in labels],
                    "confusion": [[int(v) for v in row] for row in matrix]}
    return out


def _runs_of(predictions: list[dict], arm: str) -> list[list[str]]:
    """The arm's predictions per seed as columns; empty when a line lacks the arm or has another seed count."""
    columns = []
    for p in predictions:
        preds = dig(p, "predicted", arm)
        if not isinstance(preds, list) or (columns and len(preds) != len(columns)):
            return []
        if not columns:
            columns = [[] for _ in preds]
        for col, value in zip(columns, preds):
            col.append(str(value))
    return columns
