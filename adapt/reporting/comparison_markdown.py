"""The compare job's readable outputs: the summary lines it prints and comparison.md."""

from __future__ import annotations

from adapt.config.compare import METRIC_NAMES, METRICS, TFIDF_ARM

CAUTION = ("These are research measurements on a benchmark task, not legal or medical advice; before any use "
           "in legal or clinical decisions follow your institution's validation and governance processes.")


def _num(x: float | None, signed: bool = False, digits: int = 3) -> str:
    return "n/a" if x is None else (f"{x:+.{digits}f}" if signed else f"{x:.{digits}f}")


def _span(lo: float | None, hi: float | None, signed: bool = True) -> str:
    return "n/a" if lo is None or hi is None else f"{_num(lo, signed)} to {_num(hi, signed)}"


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
    lines += _gap_lines(doc) + _budget_lines(doc) + _cost_lines(doc)
    return lines


def _metric_name(doc: dict) -> str:
    return METRIC_NAMES[doc.get("primary_metric", "macro_f1")]


def _gap_lines(doc: dict) -> list[str]:
    rows = doc.get("domain_gap")
    if not rows:
        return []
    ref = doc["reference_arm"]
    idx = f"index ({ref} on test = 100)"
    out = [f"domain gap ({_metric_name(doc)}, index: {ref} on test = 100):"]
    for r in rows:
        diff = r[f"difference vs {ref}"]
        vs = (f"; vs {ref} {_num(diff, True)} ({_span(r['difference ci_low'], r['difference ci_high'])})"
              if diff is not None else "")
        out.append(f"  {r['arm']} on {r['test set']}: {_num(r[_metric_name(doc)])}, index {_num(r[idx], digits=1)}"
                   + vs)
    return out


def _budget_lines(doc: dict) -> list[str]:
    rows = doc.get("label_budget")
    if not rows:
        return []
    out = [f"label budget ({_metric_name(doc)}, mean over seeds; difference vs {doc['reference_arm']}):"]
    for r in rows:
        diff = (f", {_num(r['difference'], True)} ({_span(r['difference_ci_low'], r['difference_ci_high'])})"
                if r["difference"] is not None else "")
        out.append(f"  {r['share']:g} of train ({r['train_examples']} examples) {r['arm']}: {_num(r['mean'])}"
                   + diff)
    return out


def _hours(seconds: float | None) -> str:
    return "n/a" if seconds is None else f"{seconds / 3600:.2f} h"


def _cost_lines(doc: dict) -> list[str]:
    cost = doc.get("cost")
    if not cost:
        return []
    out = []
    for a in cost["arms"]:
        tokens = f"{a['tokens_seen']:,}" if a["tokens_seen"] is not None else "n/a"
        gain = _span(a["gain_ci_low"], a["gain_ci_high"])
        per_hour = _span(a["gain_per_hour_ci_low"], a["gain_per_hour_ci_high"])
        out.append(f"cost: {a['arm']} took {tokens} tokens, step {a['step']}, {_hours(a['wall_seconds'])} wall "
                   f"({a['processes']} process(es), {a['precision'] or 'precision n/a'}); gain "
                   f"{_num(a['gain'], True)} {METRIC_NAMES[a['metric']]} ({gain}) = "
                   f"{_num(a['gain_per_hour'], True)} per hour of pretraining ({per_hour})")
    out += [f"checkpoints of {c['run']}: {c['recommendation']}" for c in cost.get("curves") or []]
    return out


def render_markdown(doc: dict) -> str:
    conf = round(100 * doc["confidence"])
    t = doc["task"]
    out = ["# Comparison of fine-tuned arms", "",
           f"Task `{t['dir']}`: {len(t['labels'])} labels ({', '.join(t['labels'])}); sizes "
           + ", ".join(f"{k} {v}" for k, v in t["sizes"].items()) + f". Seeds: {doc['seeds']}.", "",
           *_multilabel_note(t),
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
        vote = ("exact-match accuracy of the label set most seeds predicted" if t.get("multi_label")
                else "accuracy of the majority vote over seeds")
        out += ["", f"McNemar exact test (it tests {vote}, not macro-F1): "
                f"{mc['only_a_correct']} examples only "
                f"{pair['arm']} got right, {mc['only_b_correct']} only {pair['reference']}; p = {mc['p_value']:.3g}. "
                "Per seed: "
                + ", ".join(f"{x['p_value']:.3g}" for x in pair["mcnemar_per_seed"]) + ".", ""]
    out += _extra_sections(doc)
    out += ["## Verdict", ""]
    for v in doc["verdict"].values():
        out.append(f"- **{v['pair']}**: {v['text']}")
        out.extend(f"  - caution: {c}" for c in v["cautions"])
    if not doc["verdict"]:
        out.append("- no comparison: only the reference arm was fine-tuned")
    out += ["", f"> {CAUTION}", ""]
    return "\n".join(out)




def _multilabel_note(task: dict) -> list[str]:
    if not task.get("multi_label"):
        return []
    return [f"Multi-label task (several labels per example): accuracy is exact-match (subset) accuracy, macro-F1 "
            f"the mean of the per-label F1 over all {len(task['labels'])} labels; per-seed rows in comparison.json "
            f"add micro-F1, per-label F1 and the threshold. Decision threshold: {task['threshold_rule']}.", ""]


def _extra_sections(doc: dict) -> list[str]:
    out = []
    for title, lines in (("Domain gap", _gap_lines(doc)), ("Label budget", _budget_lines(doc)),
                         ("Cost and benefit", _cost_lines(doc))):
        if lines:
            out += [f"## {title}", "", *[f"- {x.strip()}" for x in lines], ""]
    return out
