"""Render the report's sections as Markdown; figures are linked as ``plots/<name>.png`` beside the file."""

from __future__ import annotations

from adapt.reporting.blocks import (Block, Bullets, Details, Figure, KeyFigures, Missing, Para, Pre, Row, Section,
                                    Sources, Sub, Table, Verdict)
from adapt.reporting.plots import Plot
from adapt.reporting.values import fmt_time

LABELS = {"better": "✔", "worse": "✘", "none": "≈", "missing": "?"}


def _cell(text: object) -> str:
    return str(text).replace("|", "\\|").replace("\n", " ")


def _table(headers: list[str], rows: list[list[str]]) -> list[str]:
    out = ["| " + " | ".join(_cell(h) for h in headers) + " |", "|" + "---|" * len(headers)]
    out += ["| " + " | ".join(_cell(c) for c in row) + " |" for row in rows]
    return out + [""]


def render_block(b: Block, plots: dict[str, Plot], plot_dir: str) -> list[str]:
    if isinstance(b, Para):
        return [f"*{b.text}*" if b.kind == "note" else b.text, ""]
    if isinstance(b, Missing):
        return [f"> **Missing** · {b.text}", ""]
    if isinstance(b, Table):
        return _table(b.headers, b.rows) + ([f"*{b.caption}*", ""] if b.caption else [])
    if isinstance(b, Figure):
        plot = plots.get(b.name)
        if plot is None:
            return []
        return [f"![{_cell(plot.alt)}]({plot_dir}/{plot.name}.png)", "", f"*{plot.caption}*", ""]
    if isinstance(b, Bullets):
        return [f"- {item}" for item in b.items] + [""]
    if isinstance(b, Sub):
        return [f"### {b.title}", ""]
    if isinstance(b, Pre):
        return ["```", b.text, "```", ""]
    if isinstance(b, Row):
        return [line for column in b.columns for x in column for line in render_block(x, plots, plot_dir)]
    if isinstance(b, Details):
        inner = [line for x in b.blocks for line in render_block(x, plots, plot_dir)]
        return ["<details><summary>" + b.summary + "</summary>", "", *inner, "</details>", ""]
    if isinstance(b, Verdict):
        return [f"> **{LABELS.get(b.outcome, '')} {b.label}** — {b.sentence}", *[f"> - {x}" for x in b.lines], ""]
    if isinstance(b, KeyFigures):
        return _table(["key figure", "value", "what it is"], [[f.label, f.value, f.detail] for f in b.figures])
    if isinstance(b, Sources):
        return _table(["part", "folder", "state", "note"], [list(r) for r in b.rows])
    raise RuntimeError(f"no Markdown for block {type(b).__name__}")


def render_markdown(report: dict, sections: list[Section], plots: dict[str, Plot], plot_dir: str = "plots") -> str:
    out = [f"# {report.get('title') or 'Report'}", "",
           f"*adapt {report.get('tool_version')} · generated {fmt_time(report.get('generated'))}*", ""]
    for i, s in enumerate(sections, 1):
        out += [f"## {i}. {s.title}", ""]
        for b in s.blocks:
            out += render_block(b, plots, plot_dir)
    return "\n".join(out).rstrip() + "\n"
