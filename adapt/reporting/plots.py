"""The report's figures, drawn with matplotlib into PNG bytes.

Readable without colour: every series has its own marker and line style as well as its colour, from the Okabe–Ito
palette (Okabe & Ito 2008, "Color Universal Design"), which stays distinct under the common colour-vision
deficiencies; heat maps use cividis (Nuñez et al. 2018), made for the same purpose. Axes carry units; intervals are
drawn as intervals (error bars with caps), never as bare points. Figures are made with ``matplotlib.figure.Figure``
(no pyplot, no global state) at a fixed size, so a figure's pixel size is ``figsize × DPI``.
"""

from __future__ import annotations

import functools
import io
import math
from dataclasses import dataclass
from typing import Any, Callable, Sequence

import matplotlib
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter, MaxNLocator

from adapt.reporting.values import number

DPI = 110
# Okabe–Ito
BLACK, ORANGE, SKY, GREEN, YELLOW, BLUE, VERMILLION, PURPLE = (
    "#000000", "#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7")
ARM_STYLES = {"base": (BLUE, "o", "-"), "adapted": (VERMILLION, "s", "--"), "tfidf": (GREEN, "^", ":")}
OTHER_STYLES = [(ORANGE, "D", "-."), (PURPLE, "v", (0, (5, 1, 1, 1))), (SKY, "P", (0, (1, 1))), (BLACK, "X", "-")]
TEXT_STYLES = {"domain": (ORANGE, "o", "-"), "general": (BLUE, "s", "--")}
HATCHES = ("//", "\\\\", "xx", "..", "oo", "++", "--", "||")
RC = {"font.size": 9, "axes.titlesize": 10, "axes.titleweight": "bold", "axes.titlelocation": "left",
      "axes.labelsize": 9, "axes.spines.top": False, "axes.spines.right": False, "axes.grid": True,
      "grid.color": "#d9d4c7", "grid.linewidth": 0.6, "axes.edgecolor": "#5b5a55", "axes.facecolor": "#fffdf8",
      "figure.facecolor": "#ffffff", "legend.frameon": False, "legend.fontsize": 8}


@dataclass
class Plot:
    name: str  # file stem under plots/
    png: bytes
    alt: str  # what the figure shows, for readers who cannot see it
    caption: str  # how to read it
    width_px: int
    height_px: int


def arm_style(arm: str, order: Sequence[str] = ()) -> tuple[str, str, Any]:
    """(colour, marker, line style) of an arm; arms without a fixed style take the next free one."""
    if arm in ARM_STYLES:
        return ARM_STYLES[arm]
    others = [a for a in order if a not in ARM_STYLES]
    i = others.index(arm) if arm in others else len(others)
    return OTHER_STYLES[i % len(OTHER_STYLES)]


def _render(name: str, fig: Figure, alt: str, caption: str) -> Plot:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=DPI)
    w, h = fig.get_size_inches()
    return Plot(name, buf.getvalue(), alt, caption, int(w * DPI), int(h * DPI))


def _pixels(inches: float) -> float:
    """Inches that make a whole number of pixels (matplotlib truncates the product; 1e-3 keeps it just above)."""
    return (round(inches * DPI) + 1e-3) / DPI


def _styled(draw: Callable[..., Plot | None]) -> Callable[..., Plot | None]:
    """Draw and save under the report's style (rc settings apply while artists are made and saved)."""

    @functools.wraps(draw)
    def wrapper(*args: Any, **kwargs: Any) -> Plot | None:
        with matplotlib.rc_context(RC):
            return draw(*args, **kwargs)

    return wrapper


def _figure(width_in: float, height_in: float, ncols: int = 1, **kw: Any) -> tuple[Figure, list]:
    fig = Figure(figsize=(_pixels(width_in), _pixels(height_in)), layout="constrained")
    axes = fig.subplots(1, ncols, squeeze=False, **kw)[0]
    return fig, list(axes)


def _interval(ax, x: float, mean: float | None, low: float | None, high: float | None, style, label=None,
              horizontal: bool = False) -> None:
    """A filled marker at the mean with a capped bar from low to high (just the marker when there is no interval)."""
    colour, marker, _ = style
    if mean is None:
        return
    lo = mean - low if low is not None else 0
    hi = high - mean if high is not None else 0
    err = [[max(lo, 0)], [max(hi, 0)]] if low is not None and high is not None else None
    kw = dict(fmt=marker, color=colour, ecolor=colour, elinewidth=2, capsize=5, capthick=2, markersize=7,
              markeredgecolor=BLACK, markeredgewidth=0.6, label=label, zorder=3)
    if horizontal:
        ax.errorbar([mean], [x], xerr=err, **kw)
    else:
        ax.errorbar([x], [mean], yerr=err, **kw)


@_styled
def headline_plot(downstream: dict, verdict: dict) -> Plot | None:
    """(a) the primary test metric of every arm, seeds and mean with interval; (b) each arm minus the reference."""
    arms = downstream.get("arms") or []
    metric = downstream.get("primary_metric") or "macro_f1"
    if not arms:
        return None
    names = [a["arm"] for a in arms]
    label = {"macro_f1": "macro-F1", "accuracy": "accuracy"}.get(metric, metric)
    conf = downstream.get("confidence") or 0.95
    fig, (ax, bx) = _figure(8.4, 2.9, 2, gridspec_kw={"width_ratios": [1.25, 1]})
    _seed_panel(ax, arms, names, f"test_{metric}", f"test {label} (0–1, higher is better)")
    ax.set_title(f"(a) test {label} per arm")
    rows = [t for t in downstream.get("tests") or [] if t.get("metric") == metric]
    for i, t in enumerate(rows):
        arm = str(t["pair"]).split(" vs ")[0]
        _interval(bx, i, t.get("difference"), t.get("ci_low"), t.get("ci_high"), arm_style(arm, names),
                  horizontal=True)
    bx.axvline(0, color=BLACK, linewidth=1)
    bx.set_yticks(range(len(rows)), [str(t["pair"]) for t in rows] or [])
    bx.set_ylim(-0.7, max(len(rows), 1) - 0.3)
    bx.set_xlabel(f"difference in test {label} (arm − reference)")
    bx.set_title("(b) change against the reference")
    _symmetric_x(bx, rows)
    if not rows:
        bx.text(0.5, 0.5, "no paired test in this comparison", transform=bx.transAxes, ha="center")
    alt = f"Left: test {label} of each arm, one hollow marker per seed and the mean with its interval. Right: " + (
        "; ".join(f"{t['pair']} {_pm_text(t)}" for t in rows) or "no paired test")
    return _render("headline", fig, alt, f"(a) Hollow markers: one fine-tuning seed each; filled marker and bar: "
                   f"mean and {100 * conf:.0f}% t-interval over seeds. (b) Difference of the paired test examples "
                   "with its bootstrap interval; an interval that crosses the vertical line at 0 is no detectable "
                   "difference.")


def _pm_text(t: dict) -> str:
    d, lo, hi = t.get("difference"), t.get("ci_low"), t.get("ci_high")
    if d is None:
        return "no difference recorded"
    return f"{d:+.3f}" + (f" (CI {lo:+.3f} to {hi:+.3f})" if lo is not None and hi is not None else "")


def _symmetric_x(ax, rows: list[dict]) -> None:
    values = [abs(v) for t in rows for v in (t.get("ci_low"), t.get("ci_high"), t.get("difference"))
              if v is not None]
    span = max(values + [1e-3]) * 1.25
    ax.set_xlim(-span, span)


def _seed_panel(ax, arms: list[dict], names: list[str], key: str, ylabel: str) -> None:
    for i, arm in enumerate(arms):
        style = arm_style(arm["arm"], names)
        seeds = [r.get(key) for r in arm.get("per_seed") or [] if r.get(key) is not None]
        n = len(seeds)
        xs = [i - 0.18 + (j - (n - 1) / 2) * (0.2 / max(n, 1)) for j in range(n)]  # seeds left of the mean
        ax.scatter(xs, seeds, marker=style[1], facecolors="none", edgecolors=style[0], s=30, linewidths=1.2,
                   zorder=2)
        stat = arm.get(key) or {}
        _interval(ax, i + 0.12, stat.get("mean"), stat.get("ci_low"), stat.get("ci_high"), style)
    ax.set_xticks(range(len(arms)), names)
    ax.set_xlim(-0.6, len(arms) - 0.4)
    ax.set_ylabel(ylabel)


@_styled
def seeds_plot(downstream: dict) -> Plot | None:
    """Per-seed test accuracy and macro-F1 of every arm, with the mean and its interval."""
    arms = downstream.get("arms") or []
    if not arms:
        return None
    names = [a["arm"] for a in arms]
    conf = downstream.get("confidence") or 0.95
    fig, axes = _figure(8.4, 2.8, 2)
    for ax, (key, label) in zip(axes, (("test_accuracy", "accuracy"), ("test_macro_f1", "macro-F1"))):
        _seed_panel(ax, arms, names, key, f"test {label} (0–1)")
        ax.set_title(f"test {label}: seeds and mean")
    return _render("seeds", fig, "Per-seed test accuracy and macro-F1 of every arm: " + "; ".join(
        f"{a['arm']} " + ", ".join(f"{r['test_macro_f1']:.3f}" for r in a["per_seed"] if r["test_macro_f1"]
                                   is not None) for a in arms),
        f"Hollow markers: one fine-tuning seed each; filled marker and bar: mean and {100 * conf:.0f}% t-interval "
        "over seeds (none for a deterministic arm or a single seed).")


@_styled
def funnel_plot(corpus: dict) -> Plot | None:
    """Documents left after each preparation step, and the documents removed by reason."""
    funnel = [r for r in corpus.get("funnel") or [] if r.get("docs") is not None]
    removed = [(k, v) for k, v in (corpus.get("removed") or {}).items() if v]
    if not funnel:
        return None
    fig, (ax, bx) = _figure(8.4, 0.9 + 0.26 * max(len(funnel), len(removed), 3), 2)
    stages = [str(r["stage"]).replace("_", " ") for r in funnel][::-1]
    docs = [r["docs"] for r in funnel][::-1]
    ax.barh(stages, docs, color=SKY, edgecolor=BLACK, linewidth=0.5)
    for y, v in enumerate(docs):
        ax.text(v, y, f" {v:,.0f}", va="center", fontsize=8)
    ax.set_xlim(0, max(docs) * 1.22)
    ax.set_xlabel("documents left after the step")
    ax.set_title("(a) documents after each step")
    ax.grid(axis="y", visible=False)
    if removed:
        reasons = [k.replace("_", " ") for k, _ in removed][::-1]
        counts = [v for _, v in removed][::-1]
        bars = bx.barh(reasons, counts, color=ORANGE, edgecolor=BLACK, linewidth=0.5)
        for bar, hatch in zip(bars, HATCHES):
            bar.set_hatch(hatch)
        for y, v in enumerate(counts):
            bx.text(v, y, f" {v:,.0f}", va="center", fontsize=8)
        bx.set_xlim(0, max(counts) * 1.25)
    else:
        bx.text(0.5, 0.5, "no document removed", transform=bx.transAxes, ha="center")
    bx.set_xlabel("documents removed")
    bx.set_title("(b) removed, by reason")
    bx.grid(axis="y", visible=False)
    return _render("corpus", fig, "Documents after each step: " + ", ".join(
        f"{r['stage']} {r['docs']:,.0f}" for r in funnel) + ". Removed: " + (
        ", ".join(f"{k} {v:,.0f}" for k, v in removed) or "none"),
        "Each bar of (a) counts the documents still in the corpus after that step, top to bottom in the order "
        "the steps ran; (b) counts the removed documents by the reason recorded in removed.parquet.")


@_styled
def training_plot(training: dict) -> Plot | None:
    """(a) training loss and held-out loss on domain and general text over steps; (b) the learning rate."""
    steps = training.get("steps") or []
    if not steps and not training.get("heldout"):
        return None
    fig, (ax, bx) = _figure(8.4, 2.9, 2, gridspec_kw={"width_ratios": [1.5, 1]})
    pts = [(s, v) for s, v in zip(steps, training.get("train_loss") or []) if v is not None]
    if pts:
        ax.plot(*zip(*pts), color=BLACK, linewidth=1, alpha=0.55, label="training batches")
    for name, series in (training.get("heldout") or {}).items():
        colour, marker, ls = TEXT_STYLES.get(name, (PURPLE, "D", "-."))
        if series:
            ax.plot(*zip(*series), color=colour, marker=marker, linestyle=ls, linewidth=1.6, markersize=5,
                    markeredgecolor=BLACK, markeredgewidth=0.5, label=f"held-out {name} text")
    ax.set_xlabel("optimizer step")
    ax.xaxis.set_major_locator(MaxNLocator(integer=True))
    ax.set_ylabel("MLM loss (nats per masked token)")
    ax.set_title("(a) masked-token loss")
    if ax.get_legend_handles_labels()[0]:
        ax.legend(loc="best")
    lr = [(s, v) for s, v in zip(steps, training.get("learning_rate") or []) if v is not None]
    if lr:
        bx.plot(*zip(*lr), color=GREEN, linewidth=1.6, linestyle="-", marker="." if len(lr) < 60 else None)
        bx.yaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:.1e}" if v else "0"))
    bx.set_xlabel("optimizer step")
    bx.xaxis.set_major_locator(MaxNLocator(integer=True))
    bx.set_ylabel("learning rate (per step)")
    bx.set_title("(b) learning-rate schedule")
    held = "; ".join(f"{n} {s[0][1]:.3f} at step {s[0][0]} to {s[-1][1]:.3f} at step {s[-1][0]}"
                     for n, s in (training.get("heldout") or {}).items() if s)
    return _render("training", fig, f"Training loss over {len(steps)} steps; held-out loss {held or 'not logged'}",
                   "(a) Thin line: loss of each training batch; markers: the fixed-mask held-out loss, measured "
                   "before training (step 0), every eval.every_steps steps and at the end. Falling domain loss "
                   "with flat general loss is adaptation without forgetting. (b) The learning rate at each step.")


@_styled
def warmup_plot(training: dict) -> Plot | None:
    warm = training.get("head_warmup") or {}
    losses = [v for v in warm.get("losses") or [] if v is not None]
    if not losses:
        return None
    fig, (ax,) = _figure(4.2, 2.6)
    ax.plot(range(len(losses)), losses, color=PURPLE, marker="." if len(losses) < 60 else None, linewidth=1.4)
    ax.set_xlabel("head warm-up epoch (encoder frozen; 0 = before)")
    ax.set_ylabel("held-out MLM loss (nats per masked token)")
    ax.set_title("MLM head warm-up" + ("" if warm.get("converged") else " (still falling at the end)"))
    return _render("head_warmup", fig, f"Head warm-up held-out loss from {losses[0]:.3f} to {min(losses):.3f} "
                   f"over {len(losses) - 1} epochs; converged: {warm.get('converged')}",
                   "Held-out loss of the MLM head trained alone, on cached encoder states, before the base figures "
                   "are measured. A curve still falling at the end means the base figures are pessimistic.")


@_styled
def pppl_plot(pppl: dict) -> Plot | None:
    """Pseudo-perplexity of every checkpoint on every text set, with its interval; the paired ratio in the title."""
    rows = [r for r in pppl.get("rows") or [] if r.get("pseudo_perplexity") is not None]
    if not rows:
        return None
    sets = sorted(dict.fromkeys(r["texts"] for r in rows), key=lambda t: (t != "domain", t != "general", t))
    arms = sorted(dict.fromkeys(r["arm"] for r in rows), key=lambda a: (a != "base", a != "adapted", a))
    values = [v for r in rows for v in (r["pseudo_perplexity"], r.get("ci_low"), r.get("ci_high")) if v]
    log_scale = max(values) / max(min(values), 1e-12) > 10  # a log axis only where figures differ by 10x or more
    fig, axes = _figure(min(4.2 * len(sets), 8.4), 3.1, len(sets), sharey=True)
    for ax, texts in zip(axes, sets):
        here = sorted((r for r in rows if r["texts"] == texts), key=lambda r: arms.index(r["arm"]))
        for i, r in enumerate(here):
            _interval(ax, i, r["pseudo_perplexity"], r.get("ci_low"), r.get("ci_high"), arm_style(r["arm"], arms))
            ax.annotate(f"{r['pseudo_perplexity']:,.1f}", (i, r["pseudo_perplexity"]), textcoords="offset points",
                        xytext=(9, 0), va="center", fontsize=8)
        ax.set_xticks(range(len(here)), [r["arm"] for r in here])
        ax.set_xlim(-0.6, len(here) - 0.1)
        if log_scale:
            ax.set_yscale("log")
        ax.set_title(f"{texts} text")
        pair = next((p for p in pppl.get("pairs") or [] if p["texts"] == texts and p.get("comparable")), None)
        if pair:
            level = f"{100 * pair['confidence']:.0f}% CI " if pair.get("ci_low") is not None else ""
            ax.set_xlabel(f"paired ratio {pair['arm']} / {pair['reference']} = {_ratio_text(pair, level)}")
    axes[0].set_ylabel("pseudo-perplexity per token" + (" (log scale)" if log_scale else ""))
    return _render("pppl", fig, "Pseudo-perplexity: " + "; ".join(
        f"{r['arm']} on {r['texts']} {r['pseudo_perplexity']:,.1f}" for r in rows),
        "Lower is better. Bars: bootstrap interval over documents of each figure alone. The ratio under each "
        "panel is the paired comparison on the same documents, with its own bootstrap interval.")


def _ratio_text(pair: dict, level: str = "") -> str:
    lo, hi = pair.get("ci_low"), pair.get("ci_high")
    return f"{pair['ratio']:.3g}" + (f" ({level}{lo:.3g}–{hi:.3g})" if lo is not None and hi is not None else "")


@_styled
def confusion_plot(per_class: dict, order: Sequence[str]) -> Plot | None:
    """Confusion matrix of each arm, summed over seeds; colour = share of the gold label's examples."""
    arms = [a for a in order if a in per_class][:3]
    if not arms:
        return None
    labels = per_class[arms[0]]["labels"]
    k = len(labels)
    side = min(max(2.2, 0.42 * k + 1.2), 4.0)
    fig, axes = _figure(min(side * len(arms) + 0.8, 10.0), side + 0.5, len(arms))
    image = None
    for ax, arm in zip(axes, arms):
        m = per_class[arm]["confusion"]
        rows = [[v / max(sum(r), 1) for v in r] for r in m]
        image = ax.imshow(rows, cmap="cividis", vmin=0, vmax=1)
        for i in range(k):
            for j in range(k):
                ax.text(j, i, f"{m[i][j]}", ha="center", va="center", fontsize=7 if k > 6 else 8,
                        color=BLACK if rows[i][j] > 0.55 else "#ffffff")
        ax.set_xticks(range(k), labels, rotation=45, ha="right")
        ax.set_yticks(range(k), labels if ax is axes[0] else [""] * k)
        ax.grid(False)
        ax.set_xlabel("predicted label")
        runs = per_class[arm]["n_runs"]
        ax.set_title(f"{arm} ({runs} run{'s' if runs != 1 else ''})")
    axes[0].set_ylabel("gold label")
    if image is not None:
        fig.colorbar(image, ax=axes, shrink=0.8, label="share of the gold label's examples")
    return _render("confusion", fig, "Confusion matrices (counts summed over seeds) of " + ", ".join(arms),
                   "Rows: gold label; columns: predicted label; numbers: test examples summed over the seeds; "
                   "colour: the share of that row, so the diagonal shows each label's recall.")


@_styled
def label_budget_plot(curve: Any, metric_label: str = "test score") -> Plot | None:
    """Score against the share of training labels, per arm, with intervals (when compare recorded a curve)."""
    points = _budget_points(curve)
    if not points:
        return None
    arms = list(dict.fromkeys(p["arm"] for p in points))
    fig, (ax,) = _figure(5.6, 2.9)
    for arm in arms:
        colour, marker, ls = arm_style(arm, arms)
        pts = sorted((p for p in points if p["arm"] == arm), key=lambda p: p["share"])
        ax.plot([p["share"] for p in pts], [p["mean"] for p in pts], color=colour, linestyle=ls, linewidth=1.2)
        for p in pts:
            _interval(ax, p["share"], p["mean"], p.get("ci_low"), p.get("ci_high"), (colour, marker, ls),
                      label=arm if p is pts[0] else None)
    ax.set_xlabel("share of the training labels used (0–1)")
    ax.set_ylabel(metric_label)
    ax.legend(loc="best")
    ax.set_title("label budget")
    return _render("label_budget", fig, "Label-budget curve: " + "; ".join(
        f"{p['arm']} at {p['share']:g}: {p['mean']:.3f}" for p in points),
        "Each point: the mean over seeds at that share of the training labels, with its interval.")


def _budget_points(curve: Any) -> list[dict]:
    """Rows {arm, share, mean, ci_low, ci_high} from a list of such rows or {arm: [rows]}; [] otherwise."""
    rows = []
    items = curve.items() if isinstance(curve, dict) else [(None, curve)]
    for arm, series in items:
        for r in series if isinstance(series, list) else []:
            if not isinstance(r, dict):
                continue
            share = number(r.get("share", r.get("fraction", r.get("budget"))))
            mean = number(r.get("mean"))
            name = r.get("arm", arm)
            if share is None or mean is None or name is None or math.isnan(share):
                continue
            rows.append({"arm": str(name), "share": share, "mean": mean, "ci_low": number(r.get("ci_low")),
                         "ci_high": number(r.get("ci_high"))})
    return rows


def all_plots(report: dict) -> list[Plot]:
    """Every figure the report's numbers allow, in the order of the sections."""
    down = report.get("downstream") or {}
    order = [a["arm"] for a in down.get("arms") or []]
    made = [headline_plot(down, report.get("verdict") or {}), funnel_plot(report["corpus"].get("domain") or {}),
            training_plot(report.get("training") or {}), warmup_plot(report.get("training") or {}),
            pppl_plot(report.get("pppl") or {}), seeds_plot(down), confusion_plot(down.get("per_class") or {}, order),
            label_budget_plot((down.get("extras") or {}).get("label_budget"))]
    return [p for p in made if p is not None]
