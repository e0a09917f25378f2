"""Defects planted on purpose so that a cleaning stage has something to find.

Every function takes an explicit ``random.Random``; nothing here touches the
global random state.
"""

from __future__ import annotations

import random
import re

import _data
import _world as W

# In data/noise.json: FOOTERS, the boilerplate lines shared by many documents; FOREIGN[domain][script],
# sentences in other scripts (invented content in real languages); SPAM_WORDS; NAV, the menu items of
# HTML pages; SWAPS, the word swaps of near duplicates.
FOOTERS, FOREIGN, SPAM_WORDS, NAV, SWAPS = _data.tables("noise", "FOOTERS FOREIGN SPAM_WORDS NAV SWAPS")


def _fill(rng: random.Random, template: str) -> str:
    return template.format(n=rng.randint(100, 9999), amt=rng.randint(200, 90000),
                           d=rng.randint(1, 28), k=rng.randint(2, 9),
                           t=f"{rng.uniform(36.2, 38.9):.1f}")


def foreign_doc(rng: random.Random, domain: str, script: str) -> str:
    pool = FOREIGN[domain][script]
    sents = [_fill(rng, s) for s in rng.sample(pool, rng.randint(4, len(pool)))]
    sep = "" if script == "cjk" else " "
    body = sep.join(sents)
    if rng.random() < 0.5:
        body += "\n\n" + sep.join(_fill(rng, s) for s in rng.sample(pool, 3))
    head = rng.choice(["", f"Ref {rng.randint(1000, 9999)}", "[untranslated]",
                       f"{W.date_str(rng)}"])
    return (head + "\n" + body).strip()


# -- mojibake --------------------------------------------------------------------
def _sloppy_cp1252(data: bytes) -> str:
    out = []
    for b in data:
        try:
            out.append(bytes([b]).decode("cp1252"))
        except UnicodeDecodeError:
            out.append(chr(b))
    return "".join(out)


def mojibake(rng: random.Random, text: str) -> str:
    """Typographic characters and accents, then UTF-8 bytes read as cp1252."""
    name = f"{rng.choice(W.ACCENTED_FIRST)} {rng.choice(W.ACCENTED_SURNAMES)}"
    text = text.replace("'", "\u2019").replace(" - ", " \u2013 ")
    text = re.sub(r'"([^"]+)"', "\u201c\\1\u201d", text)
    extra = rng.choice([
        f"Interpreter present: {name} (café area, ground floor).",
        f"Copy to: {name}, señora at the front desk.",
        f"Translated by {name} – déjà reviewed.",
        f"Note added by {name}: “see attached”.",
    ])
    lines = text.split("\n")
    lines.insert(rng.randint(1, max(1, len(lines) - 1)), extra)
    return _sloppy_cp1252("\n".join(lines).encode("utf-8"))


# -- markup -----------------------------------------------------------------------
def html_wrap(rng: random.Random, text: str, title: str) -> str:
    paras = [p for p in text.split("\n\n") if p.strip()]
    body = "\n".join(
        rng.choice(["<p>{}</p>", "<p class=\"body\">{}</p>", "<div>{}</div>", "<p>{}<br/></p>"]).format(
            p.replace("&", "&amp;").replace("\n", "<br>\n")) for p in paras)
    nav = "".join(f'<li><a href="/{n.lower().replace(" ", "-")}">{n}</a></li>'
                  for n in rng.sample(NAV, rng.randint(4, 8)))
    parts = [
        "<!DOCTYPE html>" if rng.random() < 0.6 else "",
        f"<html><head><meta charset=\"utf-8\"><title>{title}</title>",
        "<style>body{font-family:sans-serif;margin:0}.nav li{display:inline}</style>" if rng.random() < 0.5 else "",
        "</head><body>",
        f"<ul class=\"nav\">{nav}</ul>" if rng.random() < 0.7 else "",
        f"<h1>{title}</h1>",
        body,
        "<footer>&copy; " + str(rng.randint(2016, 2024)) + " All rights reserved &nbsp;|&nbsp; "
        "<a href=\"#top\">Back to top</a></footer>",
        "<script>window.dataLayer=window.dataLayer||[];function track(e){dataLayer.push(e)}</script>"
        if rng.random() < 0.5 else "",
        "</body></html>",
    ]
    return "\n".join(p for p in parts if p)


# -- fragments and spam -------------------------------------------------------------
def fragment(rng: random.Random, text: str) -> str:
    words = text.split()
    n = rng.randint(4, 18)
    start = rng.randint(0, max(0, len(words) - n)) if rng.random() < 0.6 else 0
    return " ".join(words[start:start + n])


def keyword_spam(rng: random.Random, domain: str) -> str:
    words = SPAM_WORDS[domain]
    town = W.town(rng)
    chunks = []
    for _ in range(rng.randint(25, 70)):
        w = rng.choice(words + [town, town.lower()])
        if rng.random() < 0.1:
            w = w.upper() + "!!!"
        chunks.append(w)
    text = " ".join(chunks)
    if rng.random() < 0.5:
        text += f" | {rng.choice(words)} {town} | {rng.choice(words)} {town} | click here"
    return text


# -- near duplicates ----------------------------------------------------------------
def near_duplicate(rng: random.Random, text: str, extra_sentence: str) -> tuple[str, str]:
    """Return (new text, description).  Changes 2-5% of words or adds a sentence."""
    if rng.random() < 0.35:
        paras = text.split("\n\n")
        i = rng.randint(1, max(1, len(paras) - 1))
        paras.insert(i, extra_sentence)
        return "\n\n".join(paras), "sentence added"
    tokens = re.split(r"(\s+)", text)
    word_idx = [i for i, t in enumerate(tokens) if t and not t.isspace()]
    k = max(2, round(len(word_idx) * rng.uniform(0.02, 0.05)))
    for i in rng.sample(word_idx, min(k, len(word_idx))):
        tok = tokens[i]
        low = tok.lower().strip(".,;:")
        if low in SWAPS:
            tokens[i] = tok.lower().replace(low, SWAPS[low], 1)
        elif any(c.isdigit() for c in tok):
            tokens[i] = re.sub(r"\d", lambda m: str((int(m.group()) + rng.randint(1, 8)) % 10), tok, count=1)
        elif rng.random() < 0.5:
            tokens[i] = ""
        else:
            tokens[i] = tok + " " + rng.choice(["very", "duly", "then", "now", "still", "indeed"])
    new = "".join(tokens)
    new = re.sub(r"[ \t]{2,}", " ", new)
    return new, f"{k} words changed"


# -- personal data ------------------------------------------------------------------
def pii_sentences(rng: random.Random, domain: str) -> tuple[list[str], list[tuple[str, str]]]:
    """One to three sentences carrying synthetic identifiers, plus (kind, value) pairs."""
    name = W.person(rng)
    kinds = rng.sample(["email", "phone", "dni", "iban", "card", "dob"], rng.randint(1, 3))
    sents, found = [], []
    for kind in kinds:
        if kind == "email":
            v = W.email(rng, name)
            s = rng.choice([f"Contact: {name} <{v}>.", f"Please reply to {v}.",
                            f"{'Patient' if domain == 'clinical' else 'Client'} email on file: {v}",
                            f"Copy sent by email to {v} on {W.date_str(rng)}."])
        elif kind == "phone":
            v = W.phone(rng)
            s = rng.choice([f"Tel: {v}", f"Contact number {v}.",
                            f"{'Next of kin' if domain == 'clinical' else 'Mobile'}: {name}, {v}.",
                            f"Please call {v} to rearrange."])
        elif kind == "dni":
            v = W.dni(rng)
            s = rng.choice([f"Identity document (DNI) {v} produced and copied.", f"DNI: {v}",
                            f"{name}, DNI {v}, attended in person."])
        elif kind == "iban":
            v = W.iban_es(rng, spaced=rng.random() < 0.5)
            s = rng.choice([f"Payment to IBAN {v}.", f"Refund to be made to account {v}.",
                            f"Bank details: {name}, IBAN {v}"])
        elif kind == "card":
            v = W.card_number(rng)
            s = rng.choice([f"Paid by card {v}.", f"Card number {v}, expiry {rng.randint(1, 12):02d}/{rng.randint(25, 30)}.",
                            f"The deposit was taken from card {v}."])
        else:
            v = W.birth_date(rng)
            s = rng.choice([f"{name}, {v}.", f"Patient {v}." if domain == "clinical" else f"The witness was {v}.",
                            f"Identity checked: {v} ({name})."])
        sents.append(s)
        found.append((kind, v))
    return sents, found


def insert_lines(rng: random.Random, text: str, lines: list[str]) -> str:
    rows = text.split("\n")
    for line in lines:
        rows.insert(rng.randint(1, len(rows)), line)
    return "\n".join(rows)
