"""The key figures a reader sees first, under the verdict: the downstream change, what adaptation did to the
language model on domain and general text, the bag-of-words floor, and what it cost. Each one says where it is from;
a figure that could not be read is left out, not guessed."""

from __future__ import annotations

from adapt.reporting.blocks import KeyFigure
from adapt.reporting.values import dig, fmt, fmt_int, fmt_interval, fmt_seconds, number

NAMES = {"macro_f1": "macro-F1", "accuracy": "accuracy"}
FEW_DOCS = 10  # below this a bootstrap over documents says little (as the score job warns)


def key_figures(report: dict) -> list[KeyFigure]:
    out: list[KeyFigure] = []
    v = report.get("verdict") or {}
    if v.get("difference") is not None:
        conf = f"{100 * v['confidence']:.0f}% CI " if v.get("confidence") else "CI "
        out.append(KeyFigure(f"downstream {v.get('metric')}", fmt(v["difference"], 3, signed=True),
                             f"{v.get('pair', '').replace(' vs ', ' − ')}; {conf}"
                             f"{fmt_interval(v.get('ci_low'), v.get('ci_high'), 3, True)}"))
    for pair in dig(report, "pppl", "pairs") or []:
        if not pair.get("comparable") or pair.get("texts") not in ("domain", "general"):
            continue
        what = "domain" if pair["texts"] == "domain" else "general text (forgetting)"
        few = " — few documents" if (pair.get("n_docs") or 0) < FEW_DOCS else ""
        out.append(KeyFigure(f"pseudo-perplexity, {what}", f"× {fmt(pair['ratio'], 3)}",
                             f"{pair['arm']} / {pair['reference']}; CI "
                             f"{fmt_interval(pair.get('ci_low'), pair.get('ci_high'), 3)}; "
                             f"{pair.get('n_docs')} document{'' if pair.get('n_docs') == 1 else 's'}{few}; "
                             "below 1 = better"))
    arms = {a["arm"]: a for a in dig(report, "downstream", "arms") or []}
    metric = "test_" + str(dig(report, "downstream", "primary_metric") or "macro_f1")
    adapted, floor = dig(arms, "adapted", metric, "mean"), dig(arms, "tfidf", metric, "mean")
    if number(adapted) is not None and number(floor) is not None:
        out.append(KeyFigure("against the TF-IDF floor", f"{fmt(adapted, 3)} vs {fmt(floor, 3)}",
                             f"mean test {NAMES.get(metric[5:], metric[5:])}: adapted vs bag-of-words"))
    cost = dig(report, "cost", "adaptation") or {}
    if cost.get("tokens_seen") is not None:
        out.append(KeyFigure("adaptation cost", f"{fmt_int(cost['tokens_seen'])} tokens",
                             f"{fmt_int(cost.get('step'))} steps; {fmt_seconds(cost.get('wall_seconds'))}; "
                             f"{cost.get('precision') or 'precision not recorded'}"))
    return out
