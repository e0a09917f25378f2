"""The report's sections, second half: pseudo-perplexity, downstream, cost and benefit, provenance, cautions."""

from __future__ import annotations

import json
from typing import Any

from adapt.reporting.blocks import Block, Bullets, Details, Figure, Missing, Para, Pre, Sub, Table
from adapt.reporting.values import (MISSING, dig, fmt, fmt_int, fmt_interval, fmt_pm, fmt_seconds, fmt_sig,
                                    number)

METRIC_NAMES = {"macro_f1": "macro-F1", "accuracy": "accuracy"}
MIN_DOCS = 10  # fewer scored documents make a bootstrap over documents say little (as the score job warns)


def pppl_blocks(report: dict) -> list[Block]:
    p = report.get("pppl") or {}
    rows = p.get("rows") or []
    if not rows:
        return [Missing("Pseudo-perplexity: no score folder was given (set score_dirs=[<output folders of "
                        "adapt-score>])")]
    blocks: list[Block] = [Missing(f"Score folder {r['path']}: {r.get('note') or r['state']}")
                           for r in rows if r.get("state") != "read"]
    good = sorted((r for r in rows if r.get("state") == "read"),
                  key=lambda r: (r["texts"] != "domain", r["texts"] != "general", r["texts"], r["arm"] != "base",
                                 r["arm"]))
    if not good:
        return blocks
    table = [[r["texts"], r["arm"], fmt_sig(r.get("pseudo_perplexity"), 5),
              fmt_interval(r.get("ci_low"), r.get("ci_high"), 2), fmt_int(r.get("n_docs")),
              fmt_int(r.get("total_tokens")), str(r.get("variant") or MISSING), str(r.get("precision") or MISSING),
              str(r.get("tokenizer_vocab_sha256") or MISSING)[:12]] for r in good]
    level = next((r["confidence"] for r in good if r.get("confidence")), 0.95)
    blocks += [Para("Exact pseudo-perplexity (Salazar et al. 2020): every scored token masked in turn; lower is "
                    "better. Figures are comparable only under the same tokenizer (same vocabulary hash), "
                    "variant and window."),
               Figure("pppl"),
               Table(["text", "checkpoint", "pseudo-perplexity", f"{100 * level:.0f}% CI (documents)", "documents",
                      "tokens", "variant", "precision", "vocabulary hash"], table)]
    pairs = p.get("pairs") or []
    if pairs:
        prow = []
        for q in pairs:
            if q.get("comparable"):
                prow.append([q["texts"], f"{q['arm']} / {q['reference']}", fmt(q["ratio"], 4),
                             fmt_interval(q.get("ci_low"), q.get("ci_high"), 4), fmt(q.get("share_ratio_below_1"), 3),
                             fmt_int(q.get("n_docs")), fmt_int(q.get("n_tokens"))])
            else:
                prow.append([q["texts"], f"{q['arm']} / {q['reference']}", "not comparable", q.get("reason", ""),
                             MISSING, MISSING, MISSING])
        blocks += [Sub("Paired comparison on the same documents"),
                   Table(["text", "ratio", "pseudo-perplexity ratio", "bootstrap CI", "share of resamples < 1",
                          "documents", "tokens"], prow,
                         "Ratio of the two checkpoints' pseudo-perplexities on the documents both scored, with a "
                         "percentile bootstrap over those documents; below 1 = the first predicts the text better.")]
    else:
        blocks.append(Missing("Paired comparison: needs a base and another checkpoint scored on the same text"))
    small = [r for r in good if (number(r.get("n_docs")) or 0) < MIN_DOCS]
    if small:
        blocks.append(Para(f"Few documents scored ({', '.join(str(r['n_docs']) for r in small)} in {len(small)} "
                           f"folder(s)): an interval over so few documents says little; raise max_docs or max_tokens "
                           "of adapt-score.", "note"))
    return blocks


def downstream_blocks(report: dict) -> list[Block]:
    d = report.get("downstream") or {}
    if d.get("state") != "read":
        return [Missing(f"Downstream comparison: {d.get('note') or d.get('state')}")]
    task = d.get("task") or {}
    conf = d.get("confidence") or 0.95
    c = f"{100 * conf:.0f}%"
    sizes = task.get("sizes") or {}
    blocks: list[Block] = [Para(
        f"Task {task.get('dir') or MISSING}: {len(task.get('labels') or [])} labels "
        f"({', '.join(task.get('labels') or [])}); {', '.join(f'{k} {v}' for k, v in sizes.items())} examples; "
        f"seeds {d.get('seeds')}; every arm fine-tuned from the encoder body with the same head initialisation "
        "and batch order per seed.")]
    rows = [[a["arm"], str(a["n_runs"]), fmt_pm(a["test_accuracy"]),
             fmt_interval(dig(a, "test_accuracy", "ci_low"), dig(a, "test_accuracy", "ci_high")),
             fmt_pm(a["test_macro_f1"]),
             fmt_interval(dig(a, "test_macro_f1", "ci_low"), dig(a, "test_macro_f1", "ci_high"))]
            for a in d.get("arms") or []]
    blocks += [Table(["arm", "runs", "test accuracy (mean ± sd)", f"{c} CI over seeds", "test macro-F1 (mean ± sd)",
                      f"{c} CI over seeds"], rows, "t-intervals over seeds; a deterministic arm has none."),
               Figure("seeds"), Sub("Paired tests on the test examples")]
    tests = [[t["pair"], METRIC_NAMES.get(t["metric"], t["metric"]), fmt(t.get("difference"), 3, True),
              fmt_interval(t.get("ci_low"), t.get("ci_high"), 3, True), fmt(t.get("bootstrap_p_better"), 3),
              fmt(t.get("permutation_p_better"), 3), fmt(t.get("permutation_p_worse"), 3), fmt(t.get("mcnemar_p"), 3)]
             for t in d.get("tests") or []]
    blocks.append(Table(["pair", "metric", "difference", f"{c} bootstrap CI", "bootstrap p (better)",
                         "permutation p (better)", "permutation p (worse)", "McNemar p (majority vote)"], tests,
                        "Paired bootstrap and permutation over test examples (Berg-Kirkpatrick et al. 2012; "
                        "Dror et al. 2018); McNemar's exact test counts the examples only one arm gets right.")
                  if tests else Missing("Paired tests: only the reference arm was fine-tuned"))
    blocks += _extras(d) + _per_class(d)
    return blocks


def _extras(d: dict) -> list[Block]:
    extras = d.get("extras") or {}
    blocks: list[Block] = [Sub("Domain gap")]
    if extras.get("domain_gap") is not None:
        blocks += generic_table(extras["domain_gap"])
    else:
        blocks.append(Missing("Domain-gap table: not measured (this comparison has one test set; it needs a "
                              "task with test sets from several domains)"))
    blocks.append(Sub("Label budget"))
    if extras.get("label_budget") is not None:
        blocks += [Figure("label_budget"), *generic_table(extras["label_budget"])]
    else:
        blocks.append(Missing("Label-budget curve: not measured (this comparison fine-tuned on the whole "
                              "training split only)"))
    return blocks


def _per_class(d: dict) -> list[Block]:
    per = d.get("per_class") or {}
    if not per:
        return [Sub("Per-class F1"), Missing("Per-class F1: predictions.jsonl is missing from the compare folder")]
    arms = list(per)
    first = per[arms[0]]
    rows = []
    for i, label in enumerate(first["labels"]):
        cells = []
        for arm in arms:
            mean = per[arm]["f1_mean"][i]
            sd = per[arm]["f1_sd"][i] if per[arm].get("f1_sd") else None
            cells.append(f"{mean:.3f} ± {sd:.3f}" if sd is not None else f"{mean:.3f}")
        rows.append([label, fmt_int(first["support"][i]), *cells])
    return [Sub("Per-class F1 and confusion"),
            Table(["label", "test examples", *[f"{a} F1" for a in arms]], rows,
                  "F1 of each label over the task's full label set (scikit-learn), mean ± sd over seeds."),
            Figure("confusion")]


def generic_table(obj: Any) -> list[Block]:
    """A table from a list of flat dicts or a dict of flat dicts; JSON text for anything else."""
    if isinstance(obj, dict) and obj and all(isinstance(v, dict) for v in obj.values()):
        cols = list(dict.fromkeys(k for v in obj.values() for k in v))
        return [Table(["", *cols], [[str(k), *[_cell(v.get(c)) for c in cols]] for k, v in obj.items()])]
    if isinstance(obj, list) and obj and all(isinstance(v, dict) for v in obj):
        cols = list(dict.fromkeys(k for v in obj for k in v))
        return [Table(cols, [[_cell(v.get(c)) for c in cols] for v in obj])]
    return [Pre(json.dumps(obj, indent=2, ensure_ascii=False, default=str))]


def _cell(value: Any) -> str:
    if isinstance(value, float):
        return fmt_sig(value, 4)
    if isinstance(value, (dict, list)):
        return json.dumps(value, ensure_ascii=False, default=str)
    return MISSING if value is None else str(value)


def cost_blocks(report: dict) -> list[Block]:
    c = report.get("cost") or {}
    a = c.get("adaptation") or {}
    blocks: list[Block] = []
    if a.get("tokens_seen") is None and a.get("wall_seconds") is None:
        blocks.append(Missing("Adaptation cost: no pretraining run was read"))
    else:
        blocks.append(Table(["adaptation", "value"], [
            ["tokens seen", fmt_int(a.get("tokens_seen"))], ["optimizer steps", fmt_int(a.get("step"))],
            ["wall time (all sessions)", fmt_seconds(a.get("wall_seconds"))],
            ["trainable parameters", f"{fmt_int(a.get('trainable_parameters'))} of "
                                     f"{fmt_int(a.get('total_parameters'))}"],
            ["precision", str(a.get("precision") or MISSING)]]))
    gains = c.get("gains") or []
    if gains:
        rows = [[g["pair"], METRIC_NAMES.get(str(g["metric"]), str(g["metric"])), fmt(g["difference"], 3, True),
                 fmt_interval(g["ci_low"], g["ci_high"], 3, True), fmt(dig(g, "per_hour", "difference"), 3, True),
                 fmt_interval(dig(g, "per_hour", "ci_low"), dig(g, "per_hour", "ci_high"), 3, True)] for g in gains]
        blocks.append(Table(["pair", "metric", "gain", "CI", "gain per hour of adaptation", "CI per hour"], rows,
                            "Gain = the verdict's difference on the test set; per hour = divided by the pretraining "
                            "run's wall time. An interval that includes 0 buys nothing for certain."))
    else:
        blocks.append(Missing("Benefit: no downstream verdict to weigh the cost against"))
    ft = c.get("finetune_seconds") or {}
    sc = [s for s in c.get("scoring") or [] if s.get("seconds") is not None]
    if ft or sc:
        blocks.append(Para("Measuring it cost: fine-tuning " + (", ".join(f"{k} {fmt_seconds(v)}" for k, v in
                                                                          ft.items()) or MISSING)
                           + "; scoring " + (", ".join(f"{s['arm']} on {s['texts']} {fmt_seconds(s['seconds'])}"
                                                       for s in sc) or MISSING) + ".", "note"))
    by_compare = c.get("reported_by_compare")
    if isinstance(by_compare, dict) and by_compare.get("arms"):
        blocks += [Sub("Cost of each adapted arm (from its pretrain run folder, read by compare)"),
                   *generic_table(by_compare["arms"])]
        for curve in by_compare.get("curves") or []:
            steps = ", ".join(f"step {p.get('step')}: {fmt(q.get('difference'), 3, True)} "
                              f"({fmt_interval(q.get('ci_low'), q.get('ci_high'), 3, True)})"
                              for p in curve.get("points") or [] for q in [p.get("vs_reference") or {}])
            blocks.append(Para(f"Checkpoints of {curve.get('run')} against the reference ({steps}). "
                               f"Recommendation: {curve.get('recommendation')}."))
    elif by_compare is not None:
        blocks += [Sub("Cost reported by the compare run"), *generic_table(by_compare)]
    return blocks


def provenance_blocks(report: dict) -> list[Block]:
    prov = report.get("provenance") or []
    if not prov:
        return [Missing("Provenance: no output folder was read")]
    versions = sorted({str(p.get("tool_version")) for p in prov})
    rows = []
    for p in prov:
        prec = p.get("precision") or {}
        rows.append([p["role"], p["path"], f"{p.get('job')}, {p.get('status')}", _span(p.get("started"), p.get("ended")),
                     str(p.get("host") or MISSING), str(p.get("seed")),
                     str(prec.get("chosen") or prec.get("requested") or MISSING), fmt_int(len(p.get("inputs") or {}))]
                    + ([str(p.get("tool_version"))] if len(versions) > 1 else []))
    blocks: list[Block] = [
        Para(f"Report made {report.get('generated')} by adapt {report.get('tool_version')}; the folders were made by "
             f"adapt {', '.join(versions)}. Every figure above comes from these folders; each folder's manifest "
             "records the tool version, the resolved configuration and the sha256 of every input file."),
        Table(["part", "folder", "job, status", "run (UTC)", "host", "seed", "precision", "input files"]
              + (["version"] if len(versions) > 1 else []), rows)]
    for p in prov:
        inputs = p.get("inputs") or {}
        blocks.append(Details(f"{p['role']}: {len(inputs)} input file hashes and the resolved configuration", [
            Table(["input file", "sha256"], [[k, v] for k, v in inputs.items()] or [[MISSING, MISSING]]),
            Pre(json.dumps(p.get("config"), indent=2, ensure_ascii=False, default=str))]))
    return blocks


def _span(started: Any, ended: Any) -> str:
    """'2026-12-02 15:47:08 → 15:47:18' (the date again only when the run crossed midnight)."""
    if not started:
        return MISSING
    start = str(started)[:19].replace("T", " ")
    if not ended:
        return f"{start} → (no end)"
    end = str(ended)[:19].replace("T", " ")
    return f"{start} → {end[11:] if end[:10] == start[:10] else end}"


def caution_blocks(report: dict) -> list[Block]:
    return [Bullets(list(report.get("cautions") or []))]
