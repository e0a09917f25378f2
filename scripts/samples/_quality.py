"""Gold examples for a document-quality classifier (good vs poor)."""

from __future__ import annotations

import random

import _clinical
import _general
import _legal
import _noise
import _world as W

GOOD_GENRES = [
    ("legal", "judgment"), ("legal", "appeal_ruling"), ("legal", "firm_memo"),
    ("legal", "correspondence"), ("legal", "tribunal_decision"),
    ("clinical", "clinic_letter"), ("clinical", "referral_letter"),
    ("clinical", "discharge_summary"), ("clinical", "radiology_report"),
    ("general", "local_news"), ("general", "travel"), ("general", "hobby_blog"),
]
POOR_KINDS = ["keyword_spam", "navigation_menu", "truncated_fragment", "number_table",
              "ocr_garbage", "markup_heavy", "repeated_lines"]

OCR_MAP = {"l": "1", "I": "|", "O": "0", "o": "0", "e": "c", "rn": "m", "m": "rn",
           "h": "b", "fi": "ﬁ", "S": "5", "a": "o", "t": "f"}


def _trim(text: str, rng: random.Random, lo: int = 50, hi: int = 170) -> str:
    paras = text.split("\n\n")
    out, words = [], 0
    limit = rng.randint(lo, hi)
    for p in paras:
        if words >= limit and words >= lo:
            break
        out.append(p)
        words += len(p.split())
    return "\n\n".join(out)


def _prose(rng: random.Random, grammars: dict, domain: str, genre: str) -> str:
    mod = {"legal": _legal, "clinical": _clinical, "general": _general}[domain]
    return mod.make_document(grammars[domain], genre)


def _ocr(rng: random.Random, text: str) -> str:
    chars = list(text)
    out = []
    i = 0
    while i < len(chars):
        c = chars[i]
        r = rng.random()
        if r < 0.12 and c in OCR_MAP:
            out.append(OCR_MAP[c])
        elif r < 0.16:
            out.append(c + " ")
        elif r < 0.19 and c == " ":
            pass
        elif r < 0.21:
            out.append(rng.choice(["~", "^", "'", ".", ",", "¦", "»"]))
        else:
            out.append(c)
        i += 1
    lines = "".join(out).split("\n")
    return "\n".join(l + ("-" if rng.random() < 0.3 else "") for l in lines)


def _table(rng: random.Random) -> str:
    cols = rng.randint(4, 8)
    head = "\t".join(rng.choice(["Ref", "Qty", "Amount", "Date", "Code", "HR", "BP", "Total", "ID", "%"])
                     for _ in range(cols))
    rows = []
    for _ in range(rng.randint(8, 25)):
        rows.append("\t".join(
            rng.choice([str(rng.randint(0, 9999)), f"{rng.uniform(0, 999):.2f}", f"{rng.randint(1, 28):02d}/{rng.randint(1, 12):02d}",
                        "-", "0", f"{rng.randint(0, 100)}%"]) for _ in range(cols)))
    return head + "\n" + "\n".join(rows)


def _nav(rng: random.Random) -> str:
    items = rng.sample(_noise.NAV, rng.randint(8, 15))
    town = W.town(rng)
    lines = [" | ".join(items[:6]), "", f"{rng.choice(W.LAW_FIRMS + W.HOSPITALS)} - {town}"]
    lines += ["> " + i for i in items[6:]]
    lines += ["Follow us", "Share: Murmur | Tattle | Circlet", "© " + str(rng.randint(2015, 2024)) + " All rights reserved",
              "Cookies | Privacy | Terms", "Skip to main content"]
    rng.shuffle(lines)
    return "\n".join(lines)


def _markup(rng: random.Random, text: str) -> str:
    words = text.split()[: rng.randint(10, 30)]
    tags = []
    for _ in range(rng.randint(12, 30)):
        tag = rng.choice(["div", "span", "td", "li", "a", "section"])
        cls = rng.choice(["col-md-4", "wrapper", "nav-item", "hidden-xs", "btn btn-primary", "row", "clearfix"])
        content = " ".join(rng.sample(words, min(len(words), rng.randint(0, 3))))
        tags.append(f'<{tag} class="{cls}" data-id="{rng.randint(100, 99999)}">{content}</{tag}>')
    return ("<html><head><script src=\"/static/app.min.js\"></script><link rel=\"stylesheet\" href=\"/css/site.css\">"
            "</head><body>" + "".join(tags) + "<script>var _q=[];_q.push(['init'," + str(rng.randint(1000, 9999))
            + "]);</script></body></html>")


def _repeated(rng: random.Random, text: str) -> str:
    sents = [s for s in text.replace("\n", " ").split(". ") if len(s.split()) > 4]
    line = rng.choice(sents or [text[:80]]).strip().rstrip(".") + "."
    other = rng.choice(["Page 1 of 1", "Continued overleaf", "SCANNED COPY", "Click to read more", line])
    rows = []
    for _ in range(rng.randint(6, 16)):
        rows.append(line if rng.random() < 0.8 else other)
    return "\n".join(rows)


def poor_doc(rng: random.Random, kind: str, grammars: dict) -> str:
    domain = rng.choice(["legal", "clinical"])
    if kind == "keyword_spam":
        return _noise.keyword_spam(rng, domain)
    if kind == "navigation_menu":
        return _nav(rng)
    if kind == "number_table":
        return _table(rng)
    base = _prose(rng, grammars, *rng.choice(GOOD_GENRES))
    if kind == "truncated_fragment":
        return _noise.fragment(rng, base)
    if kind == "ocr_garbage":
        return _ocr(rng, _trim(base, rng, 40, 120))
    if kind == "markup_heavy":
        return _markup(rng, base)
    return _repeated(rng, base)


def make_quality(rng: random.Random, n_good: int = 100, n_poor: int = 100) -> tuple[list[dict], dict]:
    grammars = {"legal": _legal.new_grammar(rng), "clinical": _clinical.new_grammar(rng),
                "general": _general.new_grammar(rng)}
    rows: list[dict] = []
    for i in range(n_good):
        domain, genre = GOOD_GENRES[i % len(GOOD_GENRES)]
        rows.append({"text": _trim(_prose(rng, grammars, domain, genre), rng), "label": "good"})
    counts = {k: 0 for k in POOR_KINDS}
    for i in range(n_poor):
        kind = POOR_KINDS[i % len(POOR_KINDS)]
        counts[kind] += 1
        rows.append({"text": poor_doc(rng, kind, grammars), "label": "poor"})
    rng.shuffle(rows)
    return rows, counts
