"""The demo's report (tiny model) opened in headless Chromium: it renders with no console error, every image loads,
every section heading is there, nothing is fetched from the network; a screenshot is saved under tmp_path."""

from __future__ import annotations

import pytest

from adapt.common.io import read_json
from adapt.config import compose_job
from adapt.reporting.blocks import SECTIONS
from tests.e2e.chromium import Browser, ensure_chromium


@pytest.fixture(scope="session")
def chromium():
    path, why = ensure_chromium()
    if path is None:
        pytest.skip(f"no headless browser: {why}")
    return path


@pytest.fixture(scope="module")
def demo_report(tmp_path_factory):
    """The demo chain on the tiny model, once for this module's tests."""
    from adapt.stages.demo import run

    out = tmp_path_factory.mktemp("demo-tiny") / "demo"
    cfg = compose_job("demo", ["debug=tiny", f"out_dir={out}", "pretrain.runtime.progress=false",
                               "compare.runtime.progress=false", "score.runtime.progress=false",
                               "prepare.runtime.progress=false", "prepare_general.runtime.progress=false"])
    result = run(cfg)
    return out, result


@pytest.mark.slow
def test_demo_report_renders_in_a_real_browser(chromium, demo_report, tmp_path):
    out, result = demo_report
    page = out / "report" / "report.html"
    assert result["summary"][-1] == f"report: {page.resolve()}"  # the demo ends by printing where the report is
    with Browser(chromium, tmp_path / "profile", width=1280, height=900) as browser:
        browser.open(page.as_uri())
        browser.evaluate("document.fonts.ready.then(() => true)")
        errors = browser.console_errors()
        images = browser.evaluate("[...document.images].map(i => ({w: i.naturalWidth, complete: i.complete}))")
        headings = browser.evaluate("[...document.querySelectorAll('h2')].map(h => h.innerText)")
        verdict_box = browser.evaluate("(() => { const r = document.querySelector('.verdict')"
                                       ".getBoundingClientRect(); return [r.top, r.height]; })()")
        first = browser.screenshot(tmp_path / "report-first-screen.png")
        full = browser.screenshot(tmp_path / "report-full-page.png", full_page=True)
        urls = browser.requested_urls()
    assert errors == []
    assert len(images) == len(read_json(out / "report" / "report.json")["plots"]) >= 5
    assert all(i["complete"] and i["w"] > 0 for i in images), images
    assert [h.split("\n")[-1].lstrip("0123456789 ") for h in headings] == [title for _, title in SECTIONS]
    assert all(u.startswith(("file:", "data:")) for u in urls), [u[:80] for u in urls]
    assert verdict_box[0] + verdict_box[1] < 900  # the verdict is on the first screen, whole
    assert first.stat().st_size > 10_000 and full.stat().st_size > first.stat().st_size


@pytest.mark.slow
def test_demo_report_numbers_are_the_stage_outputs(demo_report):
    out, _ = demo_report
    report = read_json(out / "report" / "report.json")
    comparison = read_json(out / "compare" / "comparison.json")
    v = comparison["verdict"]["adapted vs base"]
    assert (report["verdict"]["difference"], report["verdict"]["ci_low"]) == (v["difference"], v["ci_low"])
    for row in report["pppl"]["rows"]:
        scores = read_json(out / "score" / f"{row['arm']}-{row['texts']}" / "scores.json")
        assert row["pseudo_perplexity"] == scores["pseudo_perplexity"]
    assert all(s["state"] == "read" for s in report["sources"])
    assert report["training"]["steps"] == list(range(1, read_json(out / "pretrain" / "result.json")["step"] + 1))
