"""The result parts of a report: pseudo-perplexity (with the paired ratio), downstream, the headline verdict, cost
and benefit, and the cautions. Inputs come through ``collect``; the dicts returned here are what report.json holds.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Any

from adapt.common.cautions import DATA_CAUTION, NOT_ADVICE
from adapt.config.report import ReportJob
from adapt.contracts.run_folder import BASE, FINAL
from adapt.reporting import downstream as ds
from adapt.evaluation.pppl_paired import paired_ratio
from adapt.reporting.sources import Source, read_jsonl_file
from adapt.reporting.values import dig, number

if TYPE_CHECKING:
    from adapt.reporting.collect import Collected

REFERENCE_ARM = "base"
# optional parts of comparison.json that newer compare runs may write; the report shows them when present
EXTRA_TABLES = {"domain_gap": "domain-gap table", "label_budget": "label-budget curve", "cost": "cost"}


def _same(a: Any, b: Path | None) -> bool:
    if not a or b is None:
        return False
    try:
        return Path(str(a)).resolve() == b.resolve()
    except OSError:
        return False


def _arm_label(encoder: Any, pretrain: Source) -> str:
    """'base' / 'adapted' for the pretrain run's base/ and final/ folders; else the checkpoint folder's name."""
    if pretrain.path is not None:
        for sub, label in ((BASE, "base"), (FINAL, "adapted"), ("best", "best")):
            if _same(encoder, pretrain.path / sub):
                return label
    name = Path(str(encoder or "?")).name
    return {"final": "adapted"}.get(name, name)


def _text_label(texts: Any, split: Any, prepared: Source, general: Source) -> str:
    if _same(texts, prepared.path):
        return "domain"
    if _same(texts, general.path):
        return "general"
    return f"{Path(str(texts or '?')).name} ({split})" if split else Path(str(texts or "?")).name


def pppl_section(c: "Collected", scores: list[Source], cfg: ReportJob, pretrain: Source, prepared: Source,
                 general: Source) -> dict[str, Any]:
    """One row per score folder, and per text set the paired ratio of every arm against ``base``."""
    rows, raw = [], {}
    for src in scores:
        row, data = c.section(src, "scores.json", "rerun adapt-score")
        if data is not None:
            row.update({"arm": _arm_label(data.get("encoder"), pretrain),
                        "texts": _text_label(data.get("texts"), data.get("split"), prepared, general),
                        "encoder": data.get("encoder"), "pseudo_perplexity": number(data.get("pseudo_perplexity")),
                        "ci_low": number(dig(data, "ci", "low")), "ci_high": number(dig(data, "ci", "high")),
                        "confidence": number(dig(data, "ci", "confidence")) or number(dig(data, "ci", "level")),
                        "n_docs": data.get("n_docs"),
                        "total_tokens": data.get("total_tokens"), "variant": data.get("variant"),
                        "precision": data.get("precision"), "untrained_head": data.get("untrained_head"),
                        "tokens_per_second": number(data.get("tokens_per_second")),
                        "tokenizer_vocab_sha256": data.get("tokenizer_vocab_sha256")})
            raw[(row["texts"], row["arm"])] = data
        if src.path is not None:
            rows.append(row)
    pairs = []
    for (texts, arm), data in raw.items():
        base = raw.get((texts, REFERENCE_ARM))
        if arm == REFERENCE_ARM or base is None:
            continue
        p = cfg.paired_ci
        pairs.append({"texts": texts, "arm": arm, "reference": REFERENCE_ARM,
                      **paired_ratio(data, base, p.bootstrap_resamples, p.confidence, p.seed)})
    return {"rows": rows, "pairs": pairs, "given": bool(scores)}


def downstream_section(c: "Collected", src: Source) -> dict[str, Any]:
    out, comparison = c.section(src, "comparison.json", "rerun adapt-compare")
    if comparison is None:
        return out
    labels = [str(x) for x in dig(comparison, "task", "labels") or []]
    pred_path = src.path / "predictions.jsonl"
    predictions = read_jsonl_file(pred_path, src.key) if pred_path.is_file() else []
    if predictions:
        c.files_read.append(pred_path)
    primary = next((v.get("metric") for v in (comparison.get("verdict") or {}).values() if isinstance(v, dict)),
                   None)
    out.update({
        "task": {"dir": dig(comparison, "task", "dir"), "labels": labels, "sizes": dig(comparison, "task", "sizes")},
        "seeds": comparison.get("seeds"), "confidence": number(comparison.get("confidence")),
        "reference_arm": comparison.get("reference_arm"), "primary_metric": primary or "macro_f1",
        "arms": ds.arm_rows(comparison), "tests": ds.test_rows(comparison),
        "verdicts": [v for v in (comparison.get("verdict") or {}).values() if isinstance(v, dict)],
        "per_class": ds.per_class(predictions, labels),
        "extras": {key: comparison.get(key) for key in EXTRA_TABLES if comparison.get(key) is not None},
        "caution": comparison.get("caution"),
        "precision": dig(comparison, "precision") or dig(src.manifest, "precision"),
    })
    return out


def question(corpus: dict, training: dict, downstream: dict) -> str:
    encoder = training.get("encoder") or "the base encoder"
    domain = dig(corpus, "domain", "domain")
    text = f"{domain} text" if domain and domain != "general" else "the domain corpus"
    labels = dig(downstream, "task", "labels") or []
    task = (f"the labelled task “{Path(str(dig(downstream, 'task', 'dir'))).name}” ({len(labels)} labels)"
            if dig(downstream, "task", "dir") else "the labelled task")
    return (f"Did continued masked-language-model pretraining of {encoder} on {text} make it better at "
            f"{task} than the encoder it started from?")


def _primary_verdict(downstream: dict) -> dict | None:
    verdicts = downstream.get("verdicts") or []
    for v in verdicts:
        if str(v.get("pair", "")).startswith("adapted vs"):
            return v
    return verdicts[0] if verdicts else None


def headline(downstream: dict, pppl: dict) -> dict[str, Any]:
    """The verdict in one sentence with its interval, and the domain pseudo-perplexity ratio beside it."""
    v = _primary_verdict(downstream)
    out: dict[str, Any] = {"outcome": None, "sentence": None, "detail": None, "cautions": [], "pppl": None}
    if v is not None:
        conf = number(v.get("confidence")) or downstream.get("confidence")
        metric = {"macro_f1": "macro-F1", "accuracy": "accuracy"}.get(str(v.get("metric")), str(v.get("metric")))
        diff, lo, hi = number(v.get("difference")), number(v.get("ci_low")), number(v.get("ci_high"))
        span = (f" ({100 * conf:.0f}% CI {lo:+.3f} to {hi:+.3f})" if lo is not None and hi is not None and conf
                else " (no interval)")
        n_test = dig(downstream, "task", "sizes", "test")
        seeds = downstream.get("seeds") or []
        tail = f" on {n_test} test examples" if n_test else ""
        tail += f" over {len(seeds)} fine-tuning seeds" if seeds else ""
        change = f"{diff:+.3f}" if diff is not None else "—"
        out.update(outcome=v.get("outcome"), pair=v.get("pair"), metric=metric, difference=diff, ci_low=lo,
                   ci_high=hi, confidence=conf,
                   sentence=f"{v.get('pair')}: {v.get('outcome') or 'no verdict'}. Test {metric} difference "
                            f"{change}{span}{tail}.",
                   evidence=f"Test {metric} changed by {change}{span}{tail}.",
                   detail=v.get("text"), cautions=[str(x) for x in v.get("cautions") or []])
    elif downstream.get("state") == "read":
        out["sentence"] = (f"No downstream verdict: {downstream.get('path')}/comparison.json holds none (only the "
                           "reference arm was fine-tuned, or the compare run wrote no verdict).")
    else:
        out["sentence"] = f"No downstream verdict: {downstream.get('note') or downstream.get('state')}."
    domain = next((p for p in pppl.get("pairs", []) if p.get("texts") == "domain" and p.get("comparable")), None)
    if domain:
        out["pppl"] = domain
    return out


def cost_section(training: dict, downstream: dict, pppl: dict) -> dict[str, Any]:
    """What the adaptation cost (tokens, time) and what it bought (the verdict's difference per hour)."""
    hours = (number(training.get("wall_seconds")) or 0) / 3600
    gains = []
    for v in downstream.get("verdicts") or []:
        diff, lo, hi = number(v.get("difference")), number(v.get("ci_low")), number(v.get("ci_high"))
        per_hour = {k: (x / hours if x is not None and hours > 0 else None)
                    for k, x in (("difference", diff), ("ci_low", lo), ("ci_high", hi))}
        gains.append({"pair": v.get("pair"), "metric": v.get("metric"), "difference": diff, "ci_low": lo,
                      "ci_high": hi, "per_hour": per_hour, "confidence": number(v.get("confidence"))})
    finetune = {a["arm"]: sum(r["seconds"] or 0 for r in a["per_seed"]) for a in downstream.get("arms") or []}
    scoring = [{"arm": r.get("arm"), "texts": r.get("texts"), "tokens": r.get("total_tokens"),
                "seconds": (r["total_tokens"] / r["tokens_per_second"])
                if number(r.get("total_tokens")) and number(r.get("tokens_per_second")) else None}
               for r in pppl.get("rows", []) if r.get("arm")]
    return {"adaptation": {k: training.get(k) for k in ("tokens_seen", "step", "wall_seconds",
                                                          "trainable_parameters", "total_parameters")}
            | {"precision": dig(training, "precision", "chosen") or dig(training, "precision", "requested")},
            "gains": gains, "finetune_seconds": finetune, "scoring": scoring,
            "reported_by_compare": dig(downstream, "extras", "cost")}


def cautions(corpus: dict, pppl: dict, downstream: dict) -> list[str]:
    out = [DATA_CAUTION]
    for role in ("domain", "general"):
        part = corpus.get(role) or {}
        found = dig(part, "personal_data", "findings") or {}
        total = sum(int(v) for v in found.values() if number(v) is not None)
        if total:
            kinds = ", ".join(f"{k} {v}" for k, v in found.items() if v)
            out.append(f"The {role} corpus audit found {total} personal-data matches in "
                       f"{dig(part, 'personal_data', 'docs_with_findings')} documents ({kinds}; privacy mode "
                       f"{dig(part, 'personal_data', 'mode')}). The scan finds common patterns, not every "
                       "identifier: names, addresses and free-text identifiers may remain.")
        out.extend(w for w in part.get("warnings") or [] if w not in out)
    for p in pppl.get("pairs", []):
        if not p.get("comparable"):
            out.append(f"Pseudo-perplexity of {p['arm']} and {p['reference']} on {p['texts']} text is not compared: "
                       f"{p['reason']}. Compare pseudo-perplexities only under the same tokenizer.")
    if downstream.get("caution"):
        out.append(str(downstream["caution"]))
    out.append(NOT_ADVICE + " Nothing in this report is legal or medical advice, and a better score here does not "
               "make a model fit for legal or clinical decisions.")
    return out
