"""The neutral building blocks of a report page: both renderers (``html``, ``markdown``) draw the same blocks, so
the two formats always say the same thing."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Union

# the report's sections, in reading order: (anchor, heading)
SECTIONS = (
    ("verdict", "Question and verdict"),
    ("corpus", "Corpus"),
    ("training", "Training"),
    ("pppl", "Pseudo-perplexity"),
    ("downstream", "Downstream task"),
    ("cost", "Cost and benefit"),
    ("provenance", "Provenance"),
    ("cautions", "Cautions"),
)


@dataclass
class Para:
    text: str
    kind: str = ""  # "" | "lead" | "note"


@dataclass
class Missing:
    """A part the report could not show, and how to get it."""

    text: str


@dataclass
class Table:
    headers: list[str]
    rows: list[list[str]]
    caption: str = ""


@dataclass
class Figure:
    name: str  # a plot's name; a renderer skips it when no such plot was drawn


@dataclass
class Bullets:
    items: list[str]


@dataclass
class Sub:
    title: str


@dataclass
class Pre:
    text: str


@dataclass
class Details:
    summary: str
    blocks: list["Block"] = field(default_factory=list)


@dataclass
class Row:
    """Blocks side by side where the page is wide enough (one after the other in Markdown)."""

    columns: list[list["Block"]] = field(default_factory=list)


@dataclass
class Verdict:
    outcome: str  # "better" | "worse" | "none" | "missing": how the box is marked (in words, not colour alone)
    label: str
    sentence: str
    lines: list[str] = field(default_factory=list)


@dataclass
class KeyFigure:
    label: str
    value: str
    detail: str


@dataclass
class KeyFigures:
    """A strip of a few figures, each with what it is and where it comes from."""

    figures: list[KeyFigure]


@dataclass
class Sources:
    """What the report read: one row per folder (part, folder, state, note)."""

    rows: list[tuple[str, str, str, str]]


Block = Union[Para, Missing, Table, Figure, Bullets, Sub, Pre, Details, Row, Verdict, KeyFigures, Sources]


@dataclass
class Section:
    anchor: str
    title: str
    blocks: list[Block]
