"""Small labelled downstream tasks.

legal:    short case summary  -> area of law (tenancy/employment/contract/family)
clinical: triage/referral note -> specialty (cardiology/respiratory/neurology/
          gastroenterology)

Each task also has a second test set of another document type, ``test_letters``
(client letters and emails; clinic and discharge letters): the same labels and
terms, other openers and other filler, and fewer characteristic terms and class-leaning sentences,
for a domain-gap comparison.

The tasks are deliberately hard to saturate: many examples carry no
characteristic term at all, others mention a term of another class as a
distractor, vocabulary is shared between classes, and a fixed share of labels
is rotated to a wrong class (label noise, class balance preserved).  The
training split only uses the first ``SEEN`` characteristic terms of each class;
dev and test use all of them, and the corpora use every term in context.
"""

from __future__ import annotations

import random

import _data
import _world as W
from _grammar import Grammar, tidy, word_count
from _terms import CLINICAL_KIND, CLINICAL_TERMS, LEGAL_MASS, LEGAL_PARTY, LEGAL_TERMS, SEEN

SIZES = {"train": 240, "dev": 80, "test": 200, "test_letters": 120}
NOISE_PER_CLASS = {"train": 5, "dev": 2, "test": 5, "test_letters": 3}   # ~8-10% label noise
# Per task: P(characteristic term of the class), P(second one), P(term of
# another class as a distractor), P(weak class-leaning sentence).
PARAMS = {
    "legal": {"cue": 0.48, "second": 0.15, "distractor": 0.55, "weak": 0.5},
    "clinical": {"cue": 0.82, "second": 0.2, "distractor": 0.4, "weak": 0.85},
}
LETTER_SHARE = 0.5  # test_letters: share of the usual P(characteristic term) and P(weak class-leaning sentence)
MIN_WORDS, MAX_WORDS = 25, 60

# Sentence templates (syntax of _grammar; {cue} is a characteristic term) in data/tasks.json: openers,
# frames per way a term is used, class-specific frames, weak class-leaning sentences, distractors, filler.
(
    LEGAL_OPEN, LEGAL_FRAMES, LEGAL_CLASS_FRAMES, LEGAL_WEAK, LEGAL_DISTRACT, LEGAL_FILL, CLIN_OPEN,
    CLIN_FRAMES, CLIN_CLASS_FRAMES, CLIN_WEAK, CLIN_SHARED, CLIN_DISTRACT, CLIN_FILL,
    LEGAL_LETTER_OPEN, LEGAL_LETTER_FILL, CLIN_LETTER_OPEN, CLIN_LETTER_FILL,
) = _data.tables("tasks", """
    LEGAL_OPEN LEGAL_FRAMES LEGAL_CLASS_FRAMES LEGAL_WEAK LEGAL_DISTRACT LEGAL_FILL CLIN_OPEN
    CLIN_FRAMES CLIN_CLASS_FRAMES CLIN_WEAK CLIN_SHARED CLIN_DISTRACT CLIN_FILL
    LEGAL_LETTER_OPEN LEGAL_LETTER_FILL CLIN_LETTER_OPEN CLIN_LETTER_FILL
""")
LETTERS = "test_letters"


def _slots() -> dict:
    s = W.base_slots()
    s.update({
        "street": lambda r: f"{r.choice(W.STREET_NAMES)} {r.choice(W.STREET_KINDS)}",
        "firm": W.LAW_FIRMS, "gp": W.GP_PRACTICES,
        "sx": ["M", "F", "M", "F", " y/o male", " y/o female"],
        "hr": lambda r: str(r.randint(55, 125)), "bp": lambda r: f"{r.randint(95, 185)}/{r.randint(55, 100)}",
        "temp": lambda r: f"{r.uniform(36.0, 38.8):.1f}", "news": lambda r: str(r.randint(0, 6)),
        "time": lambda r: f"{r.randint(0, 23):02d}:{r.randint(0, 59):02d}", "pain": lambda r: str(r.randint(1, 9)),
        "young": lambda r: str(r.randint(42, 59)), "units": lambda r: str(r.randint(20, 90)),
        "kg": lambda r: str(r.randint(3, 12)), "age": lambda r: str(r.randint(18, 93)),
        "cdrug": W.DRUGS["cardiology"], "rdrug": W.DRUGS["respiratory"],
        "ndrug": W.DRUGS["neurology"], "gdrug": W.DRUGS["gastroenterology"],
    })
    return s


def _example(g: Grammar, label: str, terms: dict, split: str, legal: bool) -> str:
    rng = g.rng
    labels = list(terms)
    pool = terms[label] if split != "train" else terms[label][:SEEN]
    if legal:
        g.ctx = {"P": rng.choice(["the client", "the applicant", W.titled(rng), W.titled(rng),
                                  "Mr " + W.surname(rng), "Ms " + W.surname(rng), "the caller"])}
        opens, frames, cframes, weak, distract, fill = (LEGAL_OPEN, LEGAL_FRAMES, LEGAL_CLASS_FRAMES,
                                                        LEGAL_WEAK, LEGAL_DISTRACT, LEGAL_FILL)
    else:
        g.ctx = {"age": str(rng.randint(18, 93))}
        opens, frames, cframes, weak, distract, fill = (CLIN_OPEN, CLIN_FRAMES, CLIN_CLASS_FRAMES,
                                                        CLIN_WEAK, CLIN_DISTRACT, CLIN_FILL)
    if split == LETTERS:  # another document type: the same content, other openers and filler
        opens, fill = (LEGAL_LETTER_OPEN, LEGAL_LETTER_FILL) if legal else (CLIN_LETTER_OPEN, CLIN_LETTER_FILL)
    body: list[str] = []
    p = PARAMS["legal" if legal else "clinical"]
    if split == LETTERS:  # letters name the technical term and lean towards the class less often
        p = {**p, "cue": p["cue"] * LETTER_SHARE, "weak": p["weak"] * LETTER_SHARE}

    def phrase(term: str) -> tuple[str, str]:
        """(text to insert, kind) for a characteristic term."""
        if legal:
            if term in LEGAL_PARTY:
                return "the " + term, "party"
            return (term if term in LEGAL_MASS else "the " + term), "issue"
        return term, CLINICAL_KIND.get(term, "S")

    def cue_sentence(term: str) -> str:
        text, kind = phrase(term)
        g.ctx["cue"] = text
        if kind in ("issue", "S") and rng.random() < 0.3:
            return g.s(rng.choice(cframes[label]))
        return g.s(rng.choice(frames[kind]))

    if rng.random() < p["cue"]:
        body.append(cue_sentence(rng.choice(pool)))
        if rng.random() < p["second"]:
            body.append(cue_sentence(rng.choice(pool)))
    elif not legal:
        g.ctx["cue"] = rng.choice(CLIN_SHARED[label])
        body.append(g.s(rng.choice(frames["S"])))
    if rng.random() < p["weak"] or not body:
        body.append(g.pick(weak[label]))
    if rng.random() < p["distractor"]:
        other = rng.choice([l for l in labels if l != label])
        opool = terms[other] if split != "train" else terms[other][:SEEN]
        text, kind = phrase(rng.choice(opool))
        g.ctx["ocue"] = text
        body.append(g.pick(distract if legal else distract[kind]))
    fillers = g.sample(fill, rng.randint(1, 4))
    sentences = body + fillers
    rng.shuffle(sentences)
    opener = g.s(rng.choice(opens))
    text = " ".join(([opener] if opener else []) + sentences)
    spare = rng.sample(fill, len(fill))
    while word_count(text) < MIN_WORDS and spare:
        s = g.s(spare.pop())
        if s not in sentences:
            text += " " + s
    while word_count(text) > MAX_WORDS and fillers:
        drop = fillers.pop()
        text = text.replace(" " + drop, "").replace(drop + " ", "")
    words = text.split()
    if len(words) > MAX_WORDS:
        text = " ".join(words[:MAX_WORDS])
    return tidy(text)


def _split(g: Grammar, terms: dict, split: str, legal: bool) -> list[dict]:
    rng = g.rng
    labels = list(terms)
    per_class = SIZES[split] // len(labels)
    rows = [{"text": _example(g, lab, terms, split, legal), "label": lab}
            for lab in labels for _ in range(per_class)]
    # label noise: move k examples per class to other classes; every class
    # sends and receives the same numbers, so the balance is kept
    k = NOISE_PER_CLASS[split]
    by_class = {lab: [i for i, r in enumerate(rows) if r["label"] == lab] for lab in labels}
    chosen = {lab: rng.sample(by_class[lab], k) for lab in labels}
    offsets = [1 + (i % (len(labels) - 1)) for i in range(k)]   # same multiset for every class
    for j, lab in enumerate(labels):
        for i, off in zip(chosen[lab], rng.sample(offsets, k)):
            rows[i]["label"] = labels[(j + off) % len(labels)]
    rng.shuffle(rows)
    return rows


def make_tasks(rng: random.Random) -> dict[str, dict[str, list[dict]]]:
    g = Grammar(rng, _slots())
    out: dict[str, dict[str, list[dict]]] = {}
    kinds = [("legal", LEGAL_TERMS, True), ("clinical", CLINICAL_TERMS, False)]
    for name, terms, legal in kinds:
        out[name] = {split: _split(g, terms, split, legal) for split in SIZES if split != LETTERS}
    for name, terms, legal in kinds:  # drawn after the others, so that adding them changed none of those
        out[name][LETTERS] = _split(g, terms, LETTERS, legal)
    return out


NOISE_COUNTS = {split: 4 * k for split, k in NOISE_PER_CLASS.items()}
