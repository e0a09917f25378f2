"""The compare job: fine-tune every arm × seed on a labelled task, test the differences, state a verdict.

Writes into ``out_dir``: ``comparison.json`` (per arm × seed metrics, seed summaries, paired tests, verdicts),
``predictions.jsonl`` (one line per test example: gold label and every arm's prediction per seed),
``comparison.md`` (a readable summary) and ``manifest.json``.
"""

from __future__ import annotations

import json
import logging
from pathlib import Path
from typing import TYPE_CHECKING

from adapt.config.compare import METRIC_NAMES, METRICS, TFIDF_ARM, CompareJob
from adapt.contracts.manifest import RunFolder
from adapt.common.io import atomic_write_json, atomic_write_text
from adapt.contracts.labelled_task import Task, read_task
from adapt.contracts.model_folder import resolve_model_folder

# torch, transformers, scikit-learn and scipy are imported only after the inputs have been checked, so that a
# wrong path fails within a second or two instead of after the slow imports
if TYPE_CHECKING:
    from adapt.evaluation.finetune import ArmResult

log = logging.getLogger(__name__)

CAUTION = ("These are research measurements on a benchmark task, not legal or medical advice; before any use "
           "in legal or clinical decisions follow your institution's validation and governance processes.")


def resolve_checkpoint(arm: str, name_or_path: str) -> str:
    """Folder of an arm's checkpoint: the packaged alias, a model folder, or a pretrain run folder's final/."""
    return resolve_model_folder(name_or_path, f"arms.{arm}", allow_model_id=False)


def _ordered_arms(cfg: CompareJob) -> list[str]:
    return [cfg.reference_arm] + [a for a in cfg.arms if a != cfg.reference_arm]


def _run_arms(cfg: CompareJob, task: Task, checkpoints: dict[str, str],
              precision: str) -> dict[str, list[ArmResult]]:
    from tqdm.auto import tqdm

    from adapt.evaluation.finetune import check_checkpoint, finetune, tfidf_baseline

    for arm, path in checkpoints.items():  # fail before any training if a tokenizer or config is unusable
        check_checkpoint(path, arm, trust_remote_code=cfg.trust_remote_code)
    results: dict[str, list[ArmResult]] = {}
    runs = [(arm, seed) for arm in _ordered_arms(cfg) for seed in cfg.seeds]
    for i, (arm, seed) in enumerate(tqdm(runs, desc="compare", unit="run", disable=not cfg.runtime.progress), 1):
        res = finetune(checkpoints[arm], task, cfg.finetune, cfg.task.max_seq_len, seed, cfg.runtime, arm=arm,
                       precision=precision, trust_remote_code=cfg.trust_remote_code)
        log.info("[%d/%d] %s seed %d: test accuracy %.3f, macro-F1 %.3f (epoch %d, %.1f s)", i, len(runs), arm,
                 seed, res.test_accuracy, res.test_macro_f1, res.selected_epoch, res.seconds)
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
    counts = Counter(task.test.label_ids)
    small = [task.labels[i] for i in range(len(task.labels)) if counts.get(i, 0) < MIN_CLASS]
    if small:
        out.append(f"label(s) {', '.join(small[:5])} have under {MIN_CLASS} test examples: their F1, and "
                   "macro-F1, move a lot with a few predictions")
    return out


def _tests(cfg: CompareJob, task: Task, results: dict[str, list[ArmResult]]) -> tuple[dict, dict]:
    from adapt.evaluation.significance import compare_pair, holm, verdict

    sig = cfg.significance
    ref = results[cfg.reference_arm]
    tests, verdicts = {}, {}
    for arm in _ordered_arms(cfg)[1:]:
        runs = results[arm]
        pair = compare_pair(task.test.label_ids, [r.test_predictions for r in runs],
                            [r.test_predictions for r in ref],
                            {m: [getattr(r, f"test_{m}") for r in runs] for m in METRICS},
                            {m: [getattr(r, f"test_{m}") for r in ref] for m in METRICS},
                            confidence=sig.confidence, bootstrap_resamples=sig.bootstrap_resamples,
                            permutation_resamples=sig.permutation_resamples, seed=sig.seed,
                            n_classes=len(task.labels))
        tests[f"{arm} vs {cfg.reference_arm}"] = {"arm": arm, "reference": cfg.reference_arm, **pair}
    # Holm's correction over the arms tested against the reference (their primary tests)
    adjusted = holm([t["primary"][sig.primary_metric]["p_value"] for t in tests.values()]) if tests else []
    sizes = _size_cautions(task)
    for (key, t), p_adj in zip(tests.items(), adjusted):
        verdicts[key] = verdict(t, t["arm"], cfg.reference_arm, sig.primary_metric, sig.min_seeds,
                                adjusted_p=p_adj, n_compared=len(tests))
        verdicts[key]["cautions"] += sizes
        log.info("%s", verdicts[key]["text"])
    return tests, verdicts


def _write_predictions(path: Path, task: Task, results: dict[str, list[ArmResult]]) -> None:
    # texts are left out on purpose: task files may hold sensitive text; the index points back into test
    lines = []
    for i, gold in enumerate(task.test.label_ids):
        pred = {arm: [task.labels[r.test_predictions[i]] for r in runs] for arm, runs in results.items()}
        seeds = {arm: [r.seed for r in runs] for arm, runs in results.items()}
        lines.append(json.dumps({"index": i, "gold": task.labels[gold], "predicted": pred, "seeds": seeds},
                                ensure_ascii=False))
    atomic_write_text(path, "\n".join(lines) + "\n")


def _pm(stat: dict) -> str:
    return f"{stat['mean']:.3f} ± {stat['sd']:.3f}" if stat["sd"] is not None else f"{stat['mean']:.3f}"


def _ci(stat: dict) -> str:
    return f"{stat['ci_low']:.3f} to {stat['ci_high']:.3f}" if stat["ci_low"] is not None else "n/a"


def summary_lines(doc: dict) -> list[str]:
    width = max(len(a) for a in doc["arms"])
    lines = []
    for arm, rec in doc["arms"].items():
        n = len(rec["per_seed"])
        runs = "deterministic" if arm == TFIDF_ARM else f"{n} seed{'s' if n != 1 else ''}"
        lines.append(f"{arm:<{width}}  accuracy {_pm(rec['test_accuracy'])}  macro-F1 {_pm(rec['test_macro_f1'])} "
                     f"({runs})")
    for v in doc["verdict"].values():
        lines.append(f"verdict: {v['text']}")
        lines.extend(f"  caution: {c}" for c in v["cautions"])
    return lines


def render_markdown(doc: dict) -> str:
    conf = round(100 * doc["confidence"])
    t = doc["task"]
    out = ["# Comparison of fine-tuned arms", "",
           f"Task `{t['dir']}`: {len(t['labels'])} labels ({', '.join(t['labels'])}); sizes "
           + ", ".join(f"{k} {v}" for k, v in t["sizes"].items()) + f". Seeds: {doc['seeds']}.", "",
           f"| arm | test accuracy (mean ± sd) | {conf}% CI | test macro-F1 (mean ± sd) | {conf}% CI | runs |",
           "|---|---|---|---|---|---|"]
    for arm, rec in doc["arms"].items():
        a, f = rec["test_accuracy"], rec["test_macro_f1"]
        out.append(f"| {arm} | {_pm(a)} | {_ci(a)} | {_pm(f)} | {_ci(f)} | {len(rec['per_seed'])} |")
    out += ["", "CIs over seeds are t-intervals (too few seeds give wide or no intervals).", "",
            "## Primary test: seeds and test examples", "",
           "The verdict's test: the seed-averaged difference with a t-interval whose variance adds the spread "
           "over fine-tuning seeds (paired by seed) and a bootstrap over test examples (Welch–Satterthwaite "
           "degrees of freedom); p two-sided, Holm-adjusted over the arms compared with the reference.", "",
           f"| pair | metric | difference | {conf}% CI | p | SE from seeds | SE from examples | smallest "
           "detectable (80% power) |", "|---|---|---|---|---|---|---|---|"]
    for key, pair in doc["tests"].items():
        for m in METRICS:
            q = pair["primary"][m]
            out.append(f"| {key} | {METRIC_NAMES[m]} | {q['difference']:+.3f} | {q['ci_low']:+.3f} to "
                       f"{q['ci_high']:+.3f} | {q['p_value']:.3g} | {q['seed_variance'] ** 0.5:.3f} | "
                       f"{q['example_variance'] ** 0.5:.3f} | {q['min_detectable']:.3f} |")
    out += ["", "## Secondary tests on the test examples (seeds fixed: test-set sampling only)", ""]
    for key, pair in doc["tests"].items():
        out += [f"### {key}", "", f"| metric | difference | {conf}% bootstrap CI | bootstrap p (better) | "
                f"permutation p (better) | permutation p (worse) |", "|---|---|---|---|---|---|"]
        for m in METRICS:
            b, p = pair["bootstrap"][m], pair["permutation"][m]
            out.append(f"| {METRIC_NAMES[m]} | {b['difference']:+.3f} | {b['ci_low']:+.3f} to {b['ci_high']:+.3f} "
                       f"| {b['p_better']:.3g} | {p['p_better']:.3g} | {p['p_worse']:.3g} |")
        mc = pair["mcnemar_majority_vote"]
        out += ["", f"McNemar exact test (it tests accuracy of the majority vote over seeds, not macro-F1): "
                f"{mc['only_a_correct']} examples only "
                f"{pair['arm']} got right, {mc['only_b_correct']} only {pair['reference']}; p = {mc['p_value']:.3g}. "
                "Per seed: "
                + ", ".join(f"{x['p_value']:.3g}" for x in pair["mcnemar_per_seed"]) + ".", ""]
    out += ["## Verdict", ""]
    for v in doc["verdict"].values():
        out.append(f"- **{v['pair']}**: {v['text']}")
        out.extend(f"  - caution: {c}" for c in v["cautions"])
    if not doc["verdict"]:
        out.append("- no comparison: only the reference arm was fine-tuned")
    out += ["", f"> {CAUTION}", ""]
    return "\n".join(out)


def run(cfg: CompareJob) -> dict:
    """Fine-tune and evaluate every arm × seed, run the paired tests, write the outputs."""
    task = read_task(cfg.task.dir, cfg.task.text_field, cfg.task.label_field, cfg.task.allow_missing_test_labels)
    checkpoints = {arm: resolve_checkpoint(arm, cfg.arms[arm]) for arm in _ordered_arms(cfg)}
    # imports torch: only after the inputs were checked
    from adapt.common.runtime import apply_threads, resolve_device, resolve_precision

    apply_threads(cfg.runtime)
    precision = resolve_precision(cfg.runtime, resolve_device(cfg.runtime))  # once for every arm × seed
    folder = RunFolder(cfg.out_dir, "compare", cfg, inputs=task.files + [Path(c) for c in checkpoints.values()],
                       seed=cfg.significance.seed)
    try:
        results = _run_arms(cfg, task, checkpoints, precision.precision)
        tests, verdicts = _tests(cfg, task, results)
    except BaseException:
        folder.finish(status="failed", precision=precision.record())
        raise
    conf = cfg.significance.confidence
    doc = {"task": {"dir": str(task.dir), "labels": task.labels, "sizes": task.sizes,
                    "files": [str(f) for f in task.files]},
           "seeds": list(cfg.seeds), "confidence": conf, "reference_arm": cfg.reference_arm,
           "arms": {arm: _arm_record(checkpoints.get(arm, "tfidf+logistic-regression"), runs, conf)
                    for arm, runs in results.items()},
           "tests": tests, "verdict": verdicts, "precision": precision.precision, "caution": CAUTION}
    out = Path(cfg.out_dir)
    atomic_write_json(out / "comparison.json", doc)
    _write_predictions(out / "predictions.jsonl", task, results)
    atomic_write_text(out / "comparison.md", render_markdown(doc))
    folder.finish(outputs=["comparison.json", "predictions.jsonl", "comparison.md"], precision=precision.record())
    lines = summary_lines(doc) + [f"wrote {out / 'comparison.md'}"]
    return {"summary": lines, "comparison": doc, "out_dir": str(out)}
