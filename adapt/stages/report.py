"""The report job: read the output folders of prepare, pretrain, score and compare (whichever are given) and write
one page a colleague can read.

Writes into ``cfg.out_dir``: ``report.html`` (self-contained: plots embedded, no network), ``report.md`` (the same
text, plots linked from ``plots/``), ``plots/*.png``, ``report.json`` (every number shown) and ``manifest.json``
(with the sha256 of every file the report read). A folder that is not this tool's output stops the job with one
line; a missing or unfinished part is marked in the report instead.
"""

from __future__ import annotations

import logging
from pathlib import Path

from adapt.common.io import atomic_write_bytes, atomic_write_json, atomic_write_text
from adapt.config.report import ReportJob
from adapt.contracts.manifest import RunFolder
from adapt.reporting.collect import collect
from adapt.reporting.html import render_html
from adapt.reporting.markdown import render_markdown
from adapt.reporting.plots import all_plots
from adapt.reporting.sections import build_sections

log = logging.getLogger(__name__)

PLOT_DIR = "plots"


def run(cfg: ReportJob) -> dict:
    report, files_read = collect(cfg)  # raises InputError before anything is written
    out = Path(cfg.out_dir)
    folder = RunFolder(out, "report", cfg, inputs=files_read, seed=cfg.paired_ci.seed)
    try:
        plots = {p.name: p for p in all_plots(report)}
        sections = build_sections(report)
        for plot in plots.values():
            atomic_write_bytes(out / PLOT_DIR / f"{plot.name}.png", plot.png)
        report["plots"] = [f"{PLOT_DIR}/{name}.png" for name in plots]
        atomic_write_json(out / "report.json", report)
        atomic_write_text(out / "report.md", render_markdown(report, sections, plots, PLOT_DIR))
        atomic_write_text(out / "report.html", render_html(report, sections, plots))
    except BaseException:
        folder.finish(status="failed")
        raise
    folder.finish(outputs=["report.html", "report.md", "report.json", *report["plots"]])
    missing = [s for s in report["sources"] if s["state"] != "read"]
    summary = [report["verdict"]["sentence"] or "no verdict"]
    summary += [f"  missing: {s['key']}: {s['note']}" for s in missing]
    summary.append(f"report: {(out / 'report.html').resolve()}")
    log.info("report written to %s", out / "report.html")
    return {"out_dir": str(out), "html": str(out / "report.html"), "markdown": str(out / "report.md"),
            "json": str(out / "report.json"), "missing": [s["key"] for s in missing], "summary": summary}
