"""Per-document author styles.

Each document gets an invented author with habits: preferred synonyms,
discourse markers, references to bundle pages, abbreviations, digits or
number words, -ise or -ize spellings, contractions.  The habits are applied
to every sentence the grammar produces for that document, so the same
underlying pattern reads differently from one author to the next.
"""

from __future__ import annotations

import random
import re
from typing import Callable

import _data

Style = Callable[[str], str]

# Habits an author is drawn from, in data/style.json: discourse MARKERS and SYNONYMS ([word, choices])
# per domain, sentence openers that a marker may precede (LOWER_STARTS), NUMBER_WORDS written as digits,
# -ise stems (IZE) and the tags appended to sentences (REFS, CLIN_TAGS, GEN_TAGS).
(
    MARKERS, LOWER_STARTS, SYNONYMS, NUMBER_WORDS, IZE, REFS, CLIN_TAGS, GEN_TAGS,
) = _data.tables("style", """
    MARKERS LOWER_STARTS SYNONYMS NUMBER_WORDS IZE REFS CLIN_TAGS GEN_TAGS
""")
LOWER_STARTS = set(LOWER_STARTS)


def _word_re(word: str) -> re.Pattern:
    return re.compile(r"\b" + re.escape(word) + r"\b")


_COMPILED: dict[str, re.Pattern] = {}


def _sub(text: str, word: str, repl: str) -> str:
    pat = _COMPILED.get(word)
    if pat is None:
        pat = _COMPILED[word] = _word_re(word)
    return pat.sub(repl, text)


def author(rng: random.Random, domain: str, formal: bool = True) -> Style:
    """Draw an author profile and return the function that applies it."""
    marker_rate = rng.choice([0.0, 0.05, 0.1, 0.15, 0.25])
    markers = rng.sample(MARKERS[domain], rng.randint(3, len(MARKERS[domain])))
    syn_choice = [(w, rng.choice(v)) for w, v in SYNONYMS[domain] if rng.random() < 0.7]
    syn_choice = [(w, v) for w, v in syn_choice if w != v]
    digits = rng.random() < (0.25 if formal else 0.6)
    ize = rng.random() < 0.2
    tag_rate = rng.choice([0.0, 0.0, 0.06, 0.12, 0.2])
    tags = {"legal": REFS, "clinical": CLIN_TAGS, "general": GEN_TAGS}[domain]
    tags = rng.sample(tags, rng.randint(2, len(tags)))
    if domain == "legal" and not formal:
        tag_rate = min(tag_rate, 0.05)
    names = ["Jo", "Pip", "Mags", "Dev", "Alf", "Kit"]

    def apply(sentence: str) -> str:
        if not sentence or "\n" in sentence or len(sentence.split()) < 4:
            return sentence
        s = sentence
        for w, v in syn_choice:
            if w in s:
                s = _sub(s, w, v)
        if digits:
            for w, d in NUMBER_WORDS.items():
                if w in s:
                    s = _sub(s, w, d)
        if ize:
            for stem in IZE:
                if stem[:-3] in s:
                    s = s.replace(stem, stem[:-3] + "ize").replace(stem[:-3] + "ised", stem[:-3] + "ized")
        if tag_rate and s.endswith(".") and rng.random() < tag_rate:
            tag = rng.choice(tags).format(n=rng.randint(1, 480), d=rng.randint(1, 9), name=rng.choice(names))
            s = s[:-1] + tag + ("" if tag.endswith("!") else ".")
        if marker_rate and rng.random() < marker_rate:
            first, _, rest = s.partition(" ")
            if first in LOWER_STARTS and rest:
                m = rng.choice(markers)
                s = f"{m} {first.lower() if first not in ('I',) else first} {rest}"
        return s

    return apply
