"""Render the report's sections as one self-contained HTML page: plots embedded as base64 PNG, the style inline,
system fonts only; no script, no external request of any kind."""

from __future__ import annotations

import base64
import html
import re

from adapt.reporting.blocks import (Block, Bullets, Details, Figure, KeyFigures, Missing, Para, Pre, Row, Section,
                                    Sources, Sub, Table, Verdict)
from adapt.reporting.plots import Plot
from adapt.reporting.values import fmt_time

_NUMERIC = re.compile(r"^[−+\-]?[\d,]*\.?\d+(e[+-]?\d+)?%?( ± [\d.]+)?$|^—$")

CSS = """
:root { --ink:#1d1f21; --muted:#5d5a52; --paper:#fbfaf6; --card:#ffffff; --rule:#e3ded2; --accent:#0b4f6c;
        --better:#00785a; --worse:#b34700; --none:#5d5a52; --missing:#8a5a00; }
* { box-sizing: border-box; }
html { background: var(--paper); }
body { margin: 0 auto; max-width: 1120px; padding: 28px 32px 64px; color: var(--ink);
       font: 15px/1.5 system-ui, -apple-system, "Segoe UI", "Noto Sans", "DejaVu Sans", sans-serif; }
header { border-bottom: 3px solid var(--ink); padding-bottom: 10px; margin-bottom: 6px; }
header .meta { color: var(--muted); font-size: 13px; margin: 0; letter-spacing: .02em; }
h1 { font-size: 28px; margin: 2px 0 0; letter-spacing: -.01em; }
nav { font-size: 13px; margin: 8px 0 22px; color: var(--muted); }
nav a { color: var(--accent); text-decoration: none; margin-right: 14px; white-space: nowrap; }
nav a:hover { text-decoration: underline; }
section { margin: 0 0 34px; }
h2 { font-size: 21px; margin: 0 0 10px; padding-top: 8px; border-top: 1px solid var(--rule); }
h2 .num { color: var(--accent); margin-right: 8px; font-variant-numeric: tabular-nums; }
h3 { font-size: 15.5px; margin: 20px 0 6px; }
p { margin: 6px 0 10px; }
p.lead { font-size: 17px; margin-bottom: 14px; }
p.note { color: var(--muted); font-size: 13.5px; }
.verdict { background: var(--card); border: 1px solid var(--rule); border-left: 10px solid var(--none);
           padding: 14px 18px; margin: 8px 0 14px; }
.verdict.better { border-left-color: var(--better); }
.verdict.worse { border-left-color: var(--worse); }
.verdict.missing { border-left-color: var(--missing); border-left-style: dashed; }
.verdict .label { font-weight: 700; letter-spacing: .08em; font-size: 13px; margin: 0 0 2px; }
.verdict.better .label { color: var(--better); }
.verdict.worse .label { color: var(--worse); }
.verdict .sentence { font-size: 19px; font-weight: 600; margin: 0 0 6px; }
.verdict ul { margin: 6px 0 0; padding-left: 18px; font-size: 13px; color: var(--muted); }
.glance { display: grid; grid-template-columns: repeat(auto-fit, minmax(190px, 1fr)); gap: 10px; margin: 0 0 14px; }
.tile { background: var(--card); border: 1px solid var(--rule); border-top: 3px solid var(--accent);
        padding: 8px 12px; }
.tile p { margin: 0; }
.tile .what { font-size: 12px; color: var(--muted); text-transform: uppercase; letter-spacing: .05em; }
.tile .value { font-size: 20px; font-weight: 700; font-variant-numeric: tabular-nums; white-space: nowrap; }
.tile .detail { font-size: 12.5px; color: var(--muted); }
.missing { background: #fff6e0; border: 1px dashed #d9a441; padding: 6px 12px; margin: 8px 0;
           font-size: 14px; }
.missing::before { content: "Missing · "; font-weight: 700; color: var(--missing); }
figure { margin: 12px 0 16px; background: var(--card); border: 1px solid var(--rule); padding: 10px; }
figure img { display: block; max-width: 100%; height: auto; }
figcaption { color: var(--muted); font-size: 13px; margin-top: 6px; }
table { border-collapse: collapse; margin: 6px 0 4px; font-size: 13.5px; background: var(--card); }
th, td { border-bottom: 1px solid var(--rule); padding: 4px 10px; text-align: left; vertical-align: top; }
th { background: #f1eee6; font-weight: 600; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
.tablewrap { overflow-x: auto; }
.row { display: flex; flex-wrap: wrap; gap: 8px 36px; align-items: flex-start; }
.row > div { flex: 0 1 auto; min-width: 0; max-width: 100%; }
.caption { color: var(--muted); font-size: 12.5px; margin: 0 0 10px; }
.state { font-weight: 600; }
.state.read { color: var(--better); }
.state.incomplete, .state.missing { color: var(--worse); }
.state.not-given { color: var(--muted); }
pre { background: #f4f1ea; padding: 10px; overflow-x: auto; font-size: 12px; max-height: 420px; }
details { margin: 6px 0; }
summary { cursor: pointer; color: var(--accent); }
#cautions li { margin-bottom: 6px; }
footer { color: var(--muted); font-size: 12.5px; border-top: 1px solid var(--rule); padding-top: 10px; }
@media print { nav { display: none; } figure, table { break-inside: avoid; } }
"""


def _e(text: object) -> str:
    return html.escape(str(text), quote=True)


def _table(b: Table) -> str:
    head = "".join(f"<th>{_e(h)}</th>" for h in b.headers)
    body = "".join("<tr>" + "".join(f'<td class="num">{_e(c)}</td>' if _NUMERIC.match(str(c)) else f"<td>{_e(c)}</td>"
                                    for c in row) + "</tr>" for row in b.rows)
    cap = f'<p class="caption">{_e(b.caption)}</p>' if b.caption else ""
    return f'<div class="tablewrap"><table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table></div>{cap}'


def _figure(b: Figure, plots: dict[str, Plot]) -> str:
    plot = plots.get(b.name)
    if plot is None:
        return ""
    data = base64.b64encode(plot.png).decode("ascii")
    return (f'<figure id="fig-{_e(plot.name)}"><img src="data:image/png;base64,{data}" alt="{_e(plot.alt)}" '
            f'width="{plot.width_px}" height="{plot.height_px}"><figcaption>{_e(plot.caption)}</figcaption></figure>')


def _sources(b: Sources) -> str:
    rows = "".join(f"<tr><td>{_e(part)}</td><td>{_e(path)}</td><td class=\"state {_e(state.replace(' ', '-'))}\">"
                   f"{_e(state)}</td><td>{_e(note)}</td></tr>" for part, path, state, note in b.rows)
    return ('<div class="tablewrap"><table><thead><tr><th>part</th><th>folder</th><th>state</th><th>note</th></tr>'
            f"</thead><tbody>{rows}</tbody></table></div>")


def render_block(b: Block, plots: dict[str, Plot]) -> str:
    if isinstance(b, Para):
        return f'<p class="{_e(b.kind)}">{_e(b.text)}</p>' if b.kind else f"<p>{_e(b.text)}</p>"
    if isinstance(b, Missing):
        return f'<p class="missing">{_e(b.text)}</p>'
    if isinstance(b, Table):
        return _table(b)
    if isinstance(b, Figure):
        return _figure(b, plots)
    if isinstance(b, Bullets):
        return "<ul>" + "".join(f"<li>{_e(i)}</li>" for i in b.items) + "</ul>"
    if isinstance(b, Sub):
        return f"<h3>{_e(b.title)}</h3>"
    if isinstance(b, Pre):
        return f"<pre>{_e(b.text)}</pre>"
    if isinstance(b, Row):
        return '<div class="row">' + "".join("<div>" + "".join(render_block(x, plots) for x in column) + "</div>"
                                             for column in b.columns) + "</div>"
    if isinstance(b, Details):
        inner = "".join(render_block(x, plots) for x in b.blocks)
        return f"<details><summary>{_e(b.summary)}</summary>{inner}</details>"
    if isinstance(b, Verdict):
        lines = "".join(f"<li>{_e(x)}</li>" for x in b.lines)
        return (f'<div class="verdict {_e(b.outcome)}" role="status"><p class="label">{_e(b.label)}</p>'
                f'<p class="sentence">{_e(b.sentence)}</p>' + (f"<ul>{lines}</ul>" if lines else "") + "</div>")
    if isinstance(b, KeyFigures):
        return '<div class="glance">' + "".join(
            f'<div class="tile"><p class="what">{_e(f.label)}</p><p class="value">{_e(f.value)}</p>'
            f'<p class="detail">{_e(f.detail)}</p></div>' for f in b.figures) + "</div>"
    if isinstance(b, Sources):
        return _sources(b)
    raise RuntimeError(f"no HTML for block {type(b).__name__}")


def render_html(report: dict, sections: list[Section], plots: dict[str, Plot]) -> str:
    nav = "".join(f'<a href="#{_e(s.anchor)}">{i}. {_e(s.title)}</a>' for i, s in enumerate(sections, 1))
    body = "".join(
        f'<section id="{_e(s.anchor)}"><h2><span class="num">{i}</span>{_e(s.title)}</h2>'
        + "".join(render_block(b, plots) for b in s.blocks) + "</section>" for i, s in enumerate(sections, 1))
    title = _e(report.get("title") or "Report")
    return ("<!doctype html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
            "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; img-src data:; "
            "style-src 'unsafe-inline'\">"
            f"<title>{title}</title><style>{CSS}</style></head><body>"
            f"<header><p class=\"meta\">adapt {_e(report.get('tool_version'))} · generated "
            f"{_e(fmt_time(report.get('generated')))}</p><h1>{title}</h1></header><nav>{nav}</nav><main>{body}</main>"
            "<footer>Self-contained page: every figure is embedded; nothing is fetched from the network. The same "
            "numbers are in report.json, the same text in report.md.</footer></body></html>\n")
