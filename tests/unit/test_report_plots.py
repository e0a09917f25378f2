"""The report's figures: real PNGs of the stated size, readable without colour, empty input draws nothing."""

from __future__ import annotations

import io

import pytest
from PIL import Image

from adapt.reporting import plots
from adapt.reporting.collect import collect
from tests.unit.report_folders import write_all

# Okabe & Ito 2008, "Color Universal Design" (hex values as published there)
OKABE_ITO = {"#000000", "#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7"}


@pytest.fixture(scope="module")
def drawn(tmp_path_factory):
    report, _ = collect(write_all(tmp_path_factory.mktemp("folders")))
    return report, {p.name: p for p in plots.all_plots(report)}


def test_every_section_with_data_gets_its_figure(drawn):
    _, made = drawn
    assert set(made) == {"headline", "corpus", "training", "head_warmup", "pppl", "seeds", "confusion"}


def test_each_png_decodes_at_the_stated_size(drawn):
    _, made = drawn
    for plot in made.values():
        image = Image.open(io.BytesIO(plot.png))
        image.load()
        assert image.format == "PNG" and image.size == (plot.width_px, plot.height_px), plot.name
        assert image.size[0] >= 400 and image.size[1] >= 150
        assert plot.alt and plot.caption


def test_headline_figure_is_sized_from_its_inches():
    down = {"arms": [{"arm": "base", "per_seed": [{"test_macro_f1": 0.5}], "test_macro_f1": {"mean": 0.5}}],
            "primary_metric": "macro_f1", "tests": []}
    plot = plots.headline_plot(down, {})
    assert (plot.width_px, plot.height_px) == (round(8.4 * plots.DPI), round(2.9 * plots.DPI))


def test_series_differ_in_marker_and_line_style_not_only_colour():
    arms = ["base", "adapted", "tfidf", "control", "other"]
    styles = [plots.arm_style(a, arms) for a in arms]
    assert len({s[1] for s in styles}) == len(arms) and len({str(s[2]) for s in styles}) == len(arms)
    assert len({plots.TEXT_STYLES[t][1] for t in plots.TEXT_STYLES}) == len(plots.TEXT_STYLES)
    used = {s[0].upper() for s in styles} | {s[0].upper() for s in plots.TEXT_STYLES.values()}
    assert used <= OKABE_ITO


def test_intervals_are_drawn_as_error_bars():
    down = {"arms": [{"arm": "base", "per_seed": [{"test_macro_f1": 0.5}, {"test_macro_f1": 0.6}],
                      "test_macro_f1": {"mean": 0.55, "ci_low": 0.4, "ci_high": 0.7}}],
            "primary_metric": "macro_f1",
            "tests": [{"pair": "adapted vs base", "metric": "macro_f1", "difference": 0.02, "ci_low": -0.01,
                       "ci_high": 0.05}]}
    fig, (ax,) = plots._figure(3, 3)
    plots._interval(ax, 0, 0.55, 0.4, 0.7, plots.arm_style("base"))
    (container,) = ax.containers
    segments = container.lines[2][0].get_segments()  # the bar from low to high
    assert [tuple(p) for p in segments[0]] == [(0, 0.4), (0, 0.7)]
    assert plots.headline_plot(down, {}) is not None


@pytest.mark.parametrize("draw, arg", [
    (plots.headline_plot, ({}, {})), (plots.funnel_plot, ({},)), (plots.training_plot, ({},)),
    (plots.warmup_plot, ({},)), (plots.pppl_plot, ({},)), (plots.seeds_plot, ({},)),
    (plots.confusion_plot, ({}, [])), (plots.label_budget_plot, (None,)),
])
def test_nothing_to_draw_gives_no_figure(draw, arg):
    assert draw(*arg) is None


def test_label_budget_curve_is_drawn_when_compare_records_one():
    curve = {"base": [{"share": 0.1, "mean": 0.5, "ci_low": 0.4, "ci_high": 0.6}, {"share": 1.0, "mean": 0.8}],
             "adapted": [{"share": 0.1, "mean": 0.6}, {"share": 1.0, "mean": 0.82}]}
    plot = plots.label_budget_plot(curve)
    assert plot is not None and "adapted at 0.1: 0.600" in plot.alt
