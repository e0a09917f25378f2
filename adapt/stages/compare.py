"""The compare job: fine-tune every arm × seed on a labelled task, test the differences, state a verdict.

Writes into ``out_dir``: ``comparison.json`` (per arm × seed metrics, seed summaries, paired tests, verdicts),
``predictions.jsonl`` (one line per test example: gold label and every arm's prediction per seed; lists of
labels in a multi-label task),
``comparison.md`` (a readable summary) and ``manifest.json``.
"""

from __future__ import annotations

import json
import logging
from pathlib import Path
from typing import TYPE_CHECKING

from adapt.config.compare import METRICS, TFIDF_ARM, CompareJob
from adapt.contracts.manifest import RunFolder
from adapt.common.io import atomic_write_json, atomic_write_text
from adapt.contracts.labelled_task import Task, read_task
from adapt.contracts.model_folder import resolve_model_folder
from adapt.reporting.comparison_markdown import CAUTION, render_markdown, summary_lines

# torch, transformers, scikit-learn and scipy are imported only after the inputs have been checked, so that a
# wrong path fails within a second or two instead of after the slow imports
if TYPE_CHECKING:
    from adapt.evaluation.finetune import ArmResult

log = logging.getLogger(__name__)

THRESHOLD_RULE = ("one decision threshold per run, chosen on dev for each epoch from 0.05, 0.10, ..., 0.95 (the "
                  "highest dev macro-F1, the smallest threshold on ties) and applied to every test set; a label is "
                  "predicted when its sigmoid (TF-IDF arm: one-vs-rest) probability is at least the threshold")


def resolve_checkpoint(arm: str, name_or_path: str) -> str:
    """Folder of an arm's checkpoint: the packaged alias, a model folder, or a pretrain run folder's final/."""
    return resolve_model_folder(name_or_path, f"arms.{arm}", allow_model_id=False)


def _ordered_arms(cfg: CompareJob) -> list[str]:
    return [cfg.reference_arm] + [a for a in cfg.arms if a != cfg.reference_arm]


def _check_arms(cfg: CompareJob, checkpoints: dict[str, str]) -> None:
    """Fail before any training if an arm's tokenizer or config is unusable."""
    from adapt.evaluation.finetune import check_checkpoint

    for arm, path in checkpoints.items():
        check_checkpoint(path, arm, trust_remote_code=cfg.trust_remote_code)


def _run_arms(cfg: CompareJob, task: Task, checkpoints: dict[str, str], precision: str,
              budget: str = "") -> dict[str, list[ArmResult]]:
    """Every arm × seed fine-tuned on ``task`` (``budget`` names a label budget in the progress lines)."""
    from tqdm.auto import tqdm

    from adapt.evaluation.finetune import finetune, tfidf_baseline

    results: dict[str, list[ArmResult]] = {}
    runs = [(arm, seed) for arm in _ordered_arms(cfg) for seed in cfg.seeds]
    bar = tqdm(runs, desc=f"compare{budget}", unit="run", disable=not cfg.runtime.progress)
    for i, (arm, seed) in enumerate(bar, 1):
        res = finetune(checkpoints[arm], task, cfg.finetune, cfg.task.max_seq_len, seed, cfg.runtime, arm=arm,
                       precision=precision, trust_remote_code=cfg.trust_remote_code)
        log.info("[%d/%d]%s %s seed %d: test accuracy %.3f, macro-F1 %.3f (epoch %d, %.1f s)", i, len(runs), budget,
                 arm, seed, res.test_accuracy, res.test_macro_f1, res.selected_epoch, res.seconds)
        results.setdefault(arm, []).append(res)
    if cfg.tfidf_baseline:
        res = tfidf_baseline(task, list(cfg.tfidf_c_values))
        log.info("%s: test accuracy %.3f, macro-F1 %.3f (C=%g)", TFIDF_ARM, res.test_accuracy, res.test_macro_f1,
                 res.details["C"])
        results[TFIDF_ARM] = [res]
    return results


def _arm_record(checkpoint: str, runs: list[ArmResult], confidence: float) -> dict:
    from adapt.evaluation.significance import summarize

    rec: dict = {"checkpoint": checkpoint, "per_seed": [r.row() for r in runs]}
    for m in METRICS:
        for split in ("test", "dev"):
            rec[f"{split}_{m}"] = summarize([getattr(r, f"{split}_{m}") for r in runs], confidence, bounds=(0, 1))
    rec["history"] = [r.history for r in runs if r.history]
    return rec


# Sizes below which a verdict gets a caution (common practice: a test set of under ~100 examples, a dev set of
# under ~50 or a class with under ~10 test examples gives intervals too wide, or an epoch choice too noisy, to
# rely on)
MIN_TEST, MIN_DEV, MIN_CLASS = 100, 50, 10


def _size_cautions(task: Task) -> list[str]:
    from collections import Counter

    out = []
    if len(task.test.label_ids) < MIN_TEST:
        out.append(f"only {len(task.test.label_ids)} test examples (under {MIN_TEST}): intervals are wide")
    if len(task.dev.label_ids) < MIN_DEV:
        out.append(f"only {len(task.dev.label_ids)} dev examples (under {MIN_DEV}): the epoch choice is noisy")
    # per-label support: examples carrying the label (a multi-label example counts once for each of its labels)
    counts = Counter(i for ids in task.test.label_ids for i in ids) if task.multi_label else \
        Counter(task.test.label_ids)
    small = [task.labels[i] for i in range(len(task.labels)) if counts.get(i, 0) < MIN_CLASS]
    if small:
        out.append(f"label(s) {', '.join(small[:5])} have under {MIN_CLASS} test examples: their F1, and "
                   "macro-F1, move a lot with a few predictions")
    return out


def _pairs(cfg: CompareJob) -> list[tuple[str, str, str]]:
    """(arm, compared with, role) of every primary test: each arm against the reference, then against its control."""
    out = [(arm, cfg.reference_arm, "reference") for arm in _ordered_arms(cfg)[1:]]
    return out + [(arm, control, "control") for arm, control in cfg.controls.items()
                  if (arm, control) not in {(a, b) for a, b, _ in out}]


def _stat_inputs(task: Task, gold: list, runs: list[list]) -> tuple:
    """Gold and per-seed predictions as the paired tests take them: label ids, or 0/1 indicator matrices (n, C)
    and (S, n, C) in a multi-label task."""
    if not task.multi_label:
        return gold, runs
    import numpy as np

    from adapt.evaluation.significance import indicator_matrix

    n = len(task.labels)
    return indicator_matrix(gold, n), np.stack([indicator_matrix(r, n) for r in runs]) if runs else runs


def _tests(cfg: CompareJob, task: Task, results: dict[str, list[ArmResult]]) -> tuple[dict, dict]:
    from adapt.evaluation.significance import compare_pair, holm, verdict

    sig = cfg.significance
    tests, verdicts = {}, {}
    for arm, other, role in _pairs(cfg):
        runs, ref = results[arm], results[other]
        gold, preds_a = _stat_inputs(task, task.test.label_ids, [r.test_predictions for r in runs])
        preds_b = _stat_inputs(task, task.test.label_ids, [r.test_predictions for r in ref])[1]
        pair = compare_pair(gold, preds_a, preds_b,
                            {m: [getattr(r, f"test_{m}") for r in runs] for m in METRICS},
                            {m: [getattr(r, f"test_{m}") for r in ref] for m in METRICS},
                            confidence=sig.confidence, bootstrap_resamples=sig.bootstrap_resamples,
                            permutation_resamples=sig.permutation_resamples, seed=sig.seed,
                            n_classes=len(task.labels))
        tests[f"{arm} vs {other}"] = {"arm": arm, "reference": other, "role": role, **pair}
    # Holm's correction over every primary test (arms against the reference and against their controls)
    adjusted = holm([t["primary"][sig.primary_metric]["p_value"] for t in tests.values()]) if tests else []
    sizes = _size_cautions(task)
    for (key, t), p_adj in zip(tests.items(), adjusted):
        verdicts[key] = verdict(t, t["arm"], t["reference"], sig.primary_metric, sig.min_seeds,
                                adjusted_p=p_adj, n_compared=len(tests))
        verdicts[key]["role"] = t["role"]
        if t["role"] == "control":
            verdicts[key]["text"] = "domain effect beyond the same pretraining on other text: " + verdicts[key]["text"]
        verdicts[key]["cautions"] += sizes
        log.info("%s", verdicts[key]["text"])
    return tests, verdicts


def _pair_test(cfg: CompareJob, task: Task, metric: str):  # noqa: ANN202 - domain_gap.PairTest
    """The verdict's seed-aware test of one metric, on any test set (a fresh generator from the config's seed)."""
    import numpy as np

    from adapt.evaluation.significance import seed_aware_difference

    sig = cfg.significance

    def test(gold: list, a: list[list], b: list[list]) -> dict:
        rng = np.random.default_rng(sig.seed)
        (g, pa), pb = _stat_inputs(task, gold, a), _stat_inputs(task, gold, b)[1]
        return seed_aware_difference(g, pa, pb, len(task.labels), sig.bootstrap_resamples, rng,
                                     sig.confidence)[metric]
    return test


def _label_budget(cfg: CompareJob, task: Task, checkpoints: dict[str, str], precision: str,
                  full: dict[str, list[ArmResult]]) -> list[dict] | None:
    """The learning curve over cfg.label_budgets: every arm × seed fine-tuned on each nested subset."""
    from adapt.evaluation.label_budget import budget_subsets
    from adapt.evaluation.significance import summarize

    shares = sorted(cfg.label_budgets)
    if shares == [1.0]:
        return None
    metric, conf = cfg.significance.primary_metric, cfg.significance.confidence
    # a multi-label task is stratified by label set, so that every label set (and label) stays represented
    strata = [tuple(ids) for ids in task.train.label_ids] if task.multi_label else task.train.label_ids
    subsets = budget_subsets(strata, shares, cfg.label_budget_seed)
    test = _pair_test(cfg, task, metric)
    rows = []
    for share in shares:
        results = full if share == 1.0 else _run_arms(cfg, task.with_train_subset(subsets[share]), checkpoints,
                                                      precision, budget=f" at {share:g} of train")
        ref = results[cfg.reference_arm]
        for arm, runs in results.items():
            stat = summarize([getattr(r, f"test_{metric}") for r in runs], conf, bounds=(0, 1))
            row = {"arm": arm, "share": share, "train_examples": len(subsets[share]), "mean": stat["mean"],
                   "ci_low": stat["ci_low"], "ci_high": stat["ci_high"], "difference": None,
                   "difference_ci_low": None, "difference_ci_high": None}
            if arm != cfg.reference_arm and len(runs) == len(ref):
                q = test(task.test.label_ids, [r.test_predictions for r in runs], [r.test_predictions for r in ref])
                row.update(difference=q["difference"], difference_ci_low=q["ci_low"], difference_ci_high=q["ci_high"])
            rows.append(row)
    return rows


def _cost(cfg: CompareJob, task: Task, checkpoints: dict[str, str], results: dict[str, list[ArmResult]],
          tests: dict) -> dict | None:
    """Each arm's pretraining cost from its run folder, its gain per hour, and the checkpoint curve of a run whose
    checkpoints are several arms."""
    from adapt.evaluation.adaptation_cost import arm_cost, gain_per_hour, recommend

    metric = cfg.significance.primary_metric
    costs = {arm: c for arm, path in checkpoints.items() if arm != cfg.reference_arm
             and (c := arm_cost(path)) is not None}
    if not costs:
        return None
    arms = []
    for arm, c in costs.items():
        primary = tests[f"{arm} vs {cfg.reference_arm}"]["primary"][metric]
        per_hour = gain_per_hour(c, primary)
        arms.append({"arm": arm, **c, "metric": metric, "gain": primary["difference"], "gain_ci_low": primary["ci_low"],
                     "gain_ci_high": primary["ci_high"], "gain_per_hour": per_hour["difference"],
                     "gain_per_hour_ci_low": per_hour["ci_low"], "gain_per_hour_ci_high": per_hour["ci_high"]})
    out: dict = {"arms": arms, "curves": []}
    test = _pair_test(cfg, task, metric)
    by_run: dict[str, list[str]] = {}
    for arm, c in costs.items():
        by_run.setdefault(c["run"], []).append(arm)
    for run_dir, members in by_run.items():
        if len(members) < 2:
            continue
        members.sort(key=lambda a: costs[a]["step"] or 0)
        points = [{"arm": a, "step": costs[a]["step"], "tokens_seen": costs[a]["tokens_seen"],
                   "vs_reference": tests[f"{a} vs {cfg.reference_arm}"]["primary"][metric]} for a in members]
        steps = [test(task.test.label_ids, [r.test_predictions for r in results[b]],
                      [r.test_predictions for r in results[a]]) for a, b in zip(members, members[1:])]
        out["curves"].append({"run": run_dir, "metric": metric, "points": points, "step_differences": steps,
                              "recommendation": recommend(points, steps)})
    return out


def _write_predictions(out: Path, task: Task, results: dict[str, list[ArmResult]]) -> list[str]:
    """predictions.jsonl for test, predictions-<name>.jsonl for each further test set; returns the file names."""
    def names_of(ids):  # noqa: ANN001, ANN202 - a label id, or a multi-label task's list of ids
        return [task.labels[i] for i in ids] if task.multi_label else task.labels[ids]

    names = []
    seeds = {arm: [r.seed for r in runs] for arm, runs in results.items()}
    for name, split in [("test", task.test), *task.other_tests.items()]:
        # texts are left out on purpose: task files may hold sensitive text; the index points back into the file
        lines = []
        for i, gold in enumerate(split.label_ids):
            pred = {arm: [names_of((r.test_predictions if name == "test" else r.other_predictions[name])[i])
                          for r in runs] for arm, runs in results.items()}
            lines.append(json.dumps({"index": i, "gold": names_of(gold), "predicted": pred, "seeds": seeds},
                                    ensure_ascii=False))
        names.append("predictions.jsonl" if name == "test" else f"predictions-{name}.jsonl")
        atomic_write_text(out / names[-1], "\n".join(lines) + "\n")
    return names


def run(cfg: CompareJob) -> dict:
    """Fine-tune and evaluate every arm × seed, run the paired tests, write the outputs."""
    task = read_task(cfg.task.dir, cfg.task.text_field, cfg.task.label_field, cfg.task.allow_missing_test_labels,
                     dict(cfg.task.other_tests), cfg.task.label_delimiter)
    checkpoints = {arm: resolve_checkpoint(arm, cfg.arms[arm]) for arm in _ordered_arms(cfg)}
    # imports torch: only after the inputs were checked
    from adapt.common.runtime import apply_threads, resolve_device, resolve_precision
    from adapt.evaluation.domain_gap import domain_gap

    apply_threads(cfg.runtime)
    precision = resolve_precision(cfg.runtime, resolve_device(cfg.runtime))  # once for every arm × seed
    folder = RunFolder(cfg.out_dir, "compare", cfg, inputs=task.files + [Path(c) for c in checkpoints.values()],
                       seed=cfg.significance.seed)
    metric, conf = cfg.significance.primary_metric, cfg.significance.confidence
    try:
        _check_arms(cfg, checkpoints)
        results = _run_arms(cfg, task, checkpoints, precision.precision)
        tests, verdicts = _tests(cfg, task, results)
        extras = {"domain_gap": domain_gap(task, results, cfg.reference_arm, metric, conf,
                                           _pair_test(cfg, task, metric)) if task.other_tests else None,
                  "label_budget": _label_budget(cfg, task, checkpoints, precision.precision, results),
                  "cost": _cost(cfg, task, checkpoints, results, tests)}
    except BaseException:
        folder.finish(status="failed", precision=precision.record())
        raise
    doc = {"task": {"dir": str(task.dir), "labels": task.labels, "sizes": task.sizes,
                    "files": [str(f) for f in task.files], "multi_label": task.multi_label,
                    **({"threshold_rule": THRESHOLD_RULE} if task.multi_label else {})},
           "seeds": list(cfg.seeds), "confidence": conf, "reference_arm": cfg.reference_arm,
           "primary_metric": metric,
           "arms": {arm: _arm_record(checkpoints.get(arm, "tfidf+logistic-regression"), runs, conf)
                    for arm, runs in results.items()},
           "tests": tests, "verdict": verdicts,
           **{k: v for k, v in extras.items() if v is not None},
           "precision": precision.precision, "caution": CAUTION}
    out = Path(cfg.out_dir)
    atomic_write_json(out / "comparison.json", doc)
    predictions = _write_predictions(out, task, results)
    atomic_write_text(out / "comparison.md", render_markdown(doc))
    folder.finish(outputs=["comparison.json", *predictions, "comparison.md"], precision=precision.record())
    lines = summary_lines(doc) + [f"wrote {out / 'comparison.md'}"]
    return {"summary": lines, "comparison": doc, "out_dir": str(out)}
