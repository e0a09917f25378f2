"""The domain-gap table: every arm on every test set, indexed so that the reference arm on the main test set is
100, with each arm's difference from the reference on each set (the seed-aware interval of the verdict).

Reading it: an arm's gap is its index on the main test set minus its index on another set; adaptation narrows the
gap when the adapted arm's difference from the reference is larger on the other set than on the main one.
"""

from __future__ import annotations

from typing import Callable

from adapt.config.compare import METRIC_NAMES
from adapt.contracts.labelled_task import Task
from adapt.evaluation.finetune import ArmResult
from adapt.evaluation.significance import summarize

MAIN = "test"
# (gold, predictions of a per seed, predictions of b per seed) -> the seed-aware test's record of the metric
PairTest = Callable[[list[int], list[list[int]], list[list[int]]], dict]


def _split(task: Task, name: str):  # noqa: ANN202 - labelled_task.Split
    return task.test if name == MAIN else task.other_tests[name]


def _scores(runs: list[ArmResult], name: str, metric: str) -> list[float]:
    return [getattr(r, f"test_{metric}") if name == MAIN else r.other_metrics[name][metric] for r in runs]


def _predictions(runs: list[ArmResult], name: str) -> list[list[int]]:
    return [r.test_predictions if name == MAIN else r.other_predictions[name] for r in runs]


def domain_gap(task: Task, results: dict[str, list[ArmResult]], reference: str, metric: str, confidence: float,
               pair_test: PairTest) -> list[dict]:
    """One row per arm × test set (main first): mean and t-interval over seeds, index (reference on the main
    test = 100), the gap to the arm's own main-set index, and the difference from the reference with its
    seed-aware interval (arms fine-tuned with the reference's seeds only; the deterministic TF-IDF arm has none)."""
    sets = [MAIN, *task.other_tests]
    base = summarize(_scores(results[reference], MAIN, metric), confidence, bounds=(0, 1))["mean"]
    n_ref = len(results[reference])
    rows = []
    for arm, runs in results.items():
        main_index = None
        for name in sets:
            stat = summarize(_scores(runs, name, metric), confidence, bounds=(0, 1))
            index = 100 * stat["mean"] / base if base > 0 else None
            main_index = index if name == MAIN else main_index
            row = {"arm": arm, "test set": name, "examples": len(_split(task, name)),
                   METRIC_NAMES[metric]: stat["mean"], "ci_low": stat["ci_low"], "ci_high": stat["ci_high"],
                   f"index ({reference} on {MAIN} = 100)": index,
                   "gap to own test index": (main_index - index) if None not in (main_index, index) else None,
                   f"difference vs {reference}": None, "difference ci_low": None, "difference ci_high": None}
            if arm != reference and len(runs) == n_ref:
                q = pair_test(_split(task, name).label_ids, _predictions(runs, name),
                              _predictions(results[reference], name))
                row.update({f"difference vs {reference}": q["difference"], "difference ci_low": q["ci_low"],
                            "difference ci_high": q["ci_high"]})
            rows.append(row)
    return rows
