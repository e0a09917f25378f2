"""A tiny compositional grammar used by the sample-data generators.

Template syntax
---------------
``[a|b|c]``   pick one alternative at random (alternatives may nest)
``[?a|b]``    optional: with probability 0.5 render one of the alternatives
``{slot}``    a value looked up first in the document context, then in the
              global slot table.  A string value is used verbatim, a list is
              treated as alternatives (each may itself be a template) and a
              callable is called with the random generator.

Parsed templates are cached, so expanding thousands of documents is cheap.
"""

from __future__ import annotations

import random
import re
from typing import Any, Callable, Mapping

_CACHE: dict[str, list] = {}


def _parse(text: str, i: int, in_group: bool) -> tuple[list, int]:
    """Parse ``text`` from ``i``; return (parts or alternatives, next index)."""
    parts: list = []
    alts: list = []
    buf: list[str] = []

    def flush() -> None:
        if buf:
            parts.append("".join(buf))
            buf.clear()

    while i < len(text):
        ch = text[i]
        if ch == "[":
            flush()
            optional = i + 1 < len(text) and text[i + 1] == "?"
            group, i = _parse(text, i + (2 if optional else 1), True)
            parts.append(("opt" if optional else "alt", group))
            continue
        if ch == "{":
            flush()
            end = text.index("}", i)
            parts.append(("slot", text[i + 1:end]))
            i = end + 1
            continue
        if in_group and ch == "|":
            flush()
            alts.append(parts)
            parts = []
            i += 1
            continue
        if in_group and ch == "]":
            flush()
            alts.append(parts)
            return alts, i + 1
        buf.append(ch)
        i += 1
    if in_group:
        raise ValueError(f"unclosed '[' in template: {text!r}")
    flush()
    return parts, i


def parse(template: str) -> list:
    tree = _CACHE.get(template)
    if tree is None:
        tree, _ = _parse(template, 0, False)
        _CACHE[template] = tree
    return tree


class Grammar:
    """Expands templates with one random generator and a slot table."""

    def __init__(self, rng: random.Random, slots: Mapping[str, Any]):
        self.rng = rng
        self.slots = dict(slots)
        self.ctx: dict[str, Any] = {}
        self.style: Callable[[str], str] | None = None

    # -- expansion -------------------------------------------------------
    def _render(self, parts: list, out: list[str]) -> None:
        rng = self.rng
        for part in parts:
            if isinstance(part, str):
                out.append(part)
                continue
            kind, val = part
            if kind == "alt":
                self._render(val[rng.randrange(len(val))], out)
            elif kind == "opt":
                if rng.random() < 0.5:
                    self._render(val[rng.randrange(len(val))], out)
            else:
                out.append(self._slot(val))

    def _slot(self, name: str) -> str:
        if name in self.ctx:
            value = self.ctx[name]
        elif name in self.slots:
            value = self.slots[name]
        else:
            raise KeyError(f"unknown slot {{{name}}}")
        if isinstance(value, str):
            return value
        if isinstance(value, (list, tuple)):
            return self.x(value[self.rng.randrange(len(value))])
        if callable(value):
            return str(value(self.rng))
        return str(value)

    def x(self, template: str) -> str:
        """Expand one template into raw text (no tidying)."""
        out: list[str] = []
        self._render(parse(template), out)
        return "".join(out)

    def s(self, template: str) -> str:
        """Expand a template, tidy it as a sentence and apply the author style."""
        text = tidy(self.x(template))
        return self.style(text) if self.style else text

    def pick(self, templates: list[str]) -> str:
        return self.s(templates[self.rng.randrange(len(templates))])

    def sample(self, templates: list[str], k: int) -> list[str]:
        k = min(k, len(templates))
        return [self.s(t) for t in self.rng.sample(templates, k)]


_SPACES = re.compile(r"[ \t]{2,}")
_SPACE_PUNCT = re.compile(r" +([,.;:!?)])")
_A_AN = re.compile(r"\b([Aa]) (?=([aeiouAEIOU])(\w*))")
_NOT_AN = ("uni", "use", "usu", "eu", "one", "ute", "uk", "ur")


def _a_an(match: re.Match) -> str:
    word = (match.group(2) + match.group(3)).lower()
    if word.startswith(_NOT_AN):
        return match.group(0)
    return match.group(1) + "n "


def tidy(text: str) -> str:
    text = _SPACES.sub(" ", text.strip())
    text = _SPACE_PUNCT.sub(r"\1", text)
    text = text.replace("..", ".").replace(",.", ".").replace(" ,", ",")
    text = _A_AN.sub(_a_an, text)
    if text and text[0].islower() and not (len(text) > 1 and text[1].isupper()):
        text = text[0].upper() + text[1:]
    return text


def word_count(text: str) -> int:
    return len(text.split())


SlotFn = Callable[[random.Random], str]


def redraw(make_once, g: "Grammar", genre: str, target: int | None, lo: int, hi: int) -> str:
    """One document from ``make_once``; redrawn (deterministically) until its length is in [lo, hi]."""
    for _ in range(10):
        text = make_once(g, genre, target)
        if lo <= word_count(text) <= hi:
            break
        target = None
    return text
