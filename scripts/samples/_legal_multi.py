"""A small multi-label legal task: client letters to an invented firm that raise one to three areas of law.

legal_multi: client letter -> list of areas of law among tenancy/employment/contract/family

Each raised area gets a characteristic term (train: only the first ``SEEN`` terms of each area, as in the
single-label task) or, less often, only a weak area-leaning sentence; letter openers and filler come from the
letters test set of the legal task. A few areas are left out of the label list or added to it (label noise).
Everything is drawn from the ``random.Random`` given to ``make_legal_multi``, a stream of its own, so that adding
this task changed no other generated file.
"""

from __future__ import annotations

import random

import _tasks as T
import _world as W
from _grammar import Grammar, tidy, word_count
from _terms import LEGAL_TERMS, SEEN

SIZES = {"train": 240, "dev": 80, "test": 120}
AREAS = list(LEGAL_TERMS)  # tenancy, employment, contract, family
# How many areas a letter raises: 1, 2 or 3 (weights).
HOW_MANY = ((1, 0.45), (2, 0.4), (3, 0.15))
P_CUE = 0.7  # an area gets a characteristic term (else only a weak area-leaning sentence)
NOISE_PER_SPLIT = {"train": 12, "dev": 4, "test": 6}  # letters with one area dropped from or added to the labels
MAX_WORDS = 90


def _letter(g: Grammar, areas: list[str], split: str) -> str:
    rng = g.rng
    g.ctx = {"P": rng.choice(["the client", W.titled(rng), "Mr " + W.surname(rng), "Ms " + W.surname(rng)])}
    body = []
    for area in areas:
        pool = LEGAL_TERMS[area] if split != "train" else LEGAL_TERMS[area][:SEEN]
        if rng.random() < P_CUE:
            term = rng.choice(pool)
            g.ctx["cue"] = "the " + term if term in T.LEGAL_PARTY else (term if term in T.LEGAL_MASS else "the " + term)
            kind = "party" if term in T.LEGAL_PARTY else "issue"
            frame = rng.choice(T.LEGAL_CLASS_FRAMES[area]) if kind == "issue" and rng.random() < 0.3 \
                else rng.choice(T.LEGAL_FRAMES[kind])
            body.append(g.s(frame))
        else:
            body.append(g.pick(T.LEGAL_WEAK[area]))
    fillers = g.sample(T.LEGAL_LETTER_FILL, rng.randint(1, 3))
    sentences = body + fillers
    rng.shuffle(sentences)
    opener = g.s(rng.choice(T.LEGAL_LETTER_OPEN))
    text = " ".join(([opener] if opener else []) + sentences)
    while word_count(text) < T.MIN_WORDS and fillers:
        extra = g.s(rng.choice(T.LEGAL_LETTER_FILL))
        if extra in sentences:
            break
        sentences.append(extra)
        text += " " + extra
    words = text.split()
    return tidy(" ".join(words[:MAX_WORDS]))


def _split(g: Grammar, split: str) -> list[dict]:
    rng = g.rng
    counts, weights = zip(*HOW_MANY)
    rows = []
    for i in range(SIZES[split]):
        k = rng.choices(counts, weights)[0]
        # the first area cycles so that every area is raised often in every split
        first = AREAS[i % len(AREAS)]
        areas = [first] + rng.sample([a for a in AREAS if a != first], k - 1)
        rows.append({"text": _letter(g, areas, split), "label": sorted(areas)})
    for i in rng.sample(range(len(rows)), NOISE_PER_SPLIT[split]):  # label noise
        labels = rows[i]["label"]
        if len(labels) > 1 and rng.random() < 0.5:
            labels.remove(rng.choice(labels))
        else:
            missing = [a for a in AREAS if a not in labels]
            labels.append(rng.choice(missing)) if missing else labels.pop()
            labels.sort()
    rng.shuffle(rows)
    return rows


def make_legal_multi(rng: random.Random) -> dict[str, list[dict]]:
    """Split -> rows {"text", "label": [areas]} of the multi-label letters task."""
    g = Grammar(rng, T._slots())
    return {split: _split(g, split) for split in SIZES}
