"""Legal documents of the (invented) Republic of Quellmar."""

from __future__ import annotations

import random

import _data
import _style
import _world as W
from _grammar import Grammar, redraw, tidy, word_count

# Phrase pools: templates in the syntax of _grammar ([a|b] alternatives, [?a] optional parts, {slot}
# values), in data/legal_phrases.json.  Every name, place and statute is invented.
(
    AREAS, FACTS, REASONING, JUDGMENT_INTROS, CONCLUSIONS, APPEAL, TRIBUNAL, NOTICE_TYPES,
    NOTICE_EXTRA, CLAUSES, CLAUSE_INTROS, MEMO_OPEN, MEMO_BODY, MEMO_CLOSE, SI_INTROS,
    SI_PREAMBLE, SI_FIRST, SI_INTERP, SI_RULES, SI_COMMON, SI_NOTES, SI_TITLES, LETTER_OPEN,
    LETTER_BODY, LETTER_CLOSE, DOC_THINGS, DEPTS, REPAIR_ITEMS,
) = _data.tables("legal_phrases", """
    AREAS FACTS REASONING JUDGMENT_INTROS CONCLUSIONS APPEAL TRIBUNAL NOTICE_TYPES NOTICE_EXTRA CLAUSES
    CLAUSE_INTROS MEMO_OPEN MEMO_BODY MEMO_CLOSE SI_INTROS SI_PREAMBLE SI_FIRST SI_INTERP SI_RULES
    SI_COMMON SI_NOTES SI_TITLES LETTER_OPEN LETTER_BODY LETTER_CLOSE DOC_THINGS DEPTS REPAIR_ITEMS
""")


def _judge(rng: random.Random) -> str:
    name = W.person(rng)
    last = name.split(" ")[1]
    return rng.choice([f"Justice {last}", f"Judge {name}", f"Her Honour Judge {last}"
                       if name.split(" ")[0] in W.FEMALE else f"His Honour Judge {last}",
                       f"Deputy District Judge {last}", f"Employment Judge {last}"])


def _amt_range(rng: random.Random) -> str:
    lo = rng.randint(4, 120) * 500
    hi = lo + rng.randint(2, 60) * 500
    return f"{lo:,} to {hi:,} {W.CURRENCY}"


def slots() -> dict:
    s = W.base_slots()
    s.update({
        "country": W.COUNTRY,
        "country_upper": W.COUNTRY.upper(),
        "act_t": W.ACTS["tenancy"],
        "act_e": W.ACTS["employment"],
        "act_c": W.ACTS["contract"],
        "act_f": W.ACTS["family"],
        "act_g": W.ACTS["general"],
        "firm": W.LAW_FIRMS,
        "doc_thing": DOC_THINGS,
        "dept": DEPTS,
        "repair_item": REPAIR_ITEMS,
        "judge": _judge,
        "ref": lambda r: f"{r.choice(['TOV', 'QDP', 'BXM', 'FML', 'CHS', 'PA', 'WL'])}/{r.choice(W.SURNAMES)[:3].upper()}/{r.randint(100, 9999)}",
        "year_m": lambda r: str(r.randint(1995, 2012)),
        "kid_ages": lambda r: W.ages(r, r.randint(1, 3)),
        "kids_names": lambda r: f"{r.choice(W.FIRST_NAMES)} and {r.choice(W.FIRST_NAMES)}",
        "si_no": lambda r: str(r.randint(12, 480)),
        "lower_judge": _judge,
        "lower_court": lambda r: r.choice([f"District Court at {W.town(r)}", "High Court",
                                           f"{W.town(r)} Employment Tribunal",
                                           f"Family Court sitting at {W.town(r)}",
                                           "Housing and Leases Tribunal"]),
        "initials": lambda r: f"{r.choice(W.FIRST_NAMES)[0]}{r.choice(W.SURNAMES)[0]}",
        "firm_short": lambda r: r.choice(W.LAW_FIRMS).split(" ")[0],
        "act_revoked": lambda r: r.choice(W.ACTS["general"]),
        "sched": lambda r: str(r.randint(1, 6)),
        "amt_range": _amt_range,
    })
    return s


def _context(rng: random.Random, area: str) -> dict:
    cl, rs = W.person(rng), W.person(rng)
    landlord = rng.choice([W.person(rng), W.company(rng)])
    ctx = {
        "area": area,
        "cl": cl, "rs": rs,
        "landlord": landlord, "tenant": W.person(rng),
        "employer": W.company(rng), "employee": W.person(rng),
        "buyer": W.company(rng), "seller": W.company(rng),
        "mother": W.person(rng), "father": W.person(rng),
        "rent": W.amount(rng, 450, 3200),
        "author": W.person(rng),
        "addressee": rng.choice(["Sirs", W.titled(rng), W.titled(rng), "Colleague"]),
        "client_name": rng.choice([W.titled(rng), W.company(rng), "our client"]),
        "court": _court(rng, area),
        "judge": _judge(rng),
        "prop": W.address(rng),
    }
    ctx["author_first"] = ctx["author"].split(" ")[0]
    ctx["firm"] = rng.choice(W.LAW_FIRMS)
    p1, p2 = {"tenancy": ("landlord", "tenant"),
              "employment": ("claimant", "respondent"),
              "contract": ("claimant", "defendant"),
              "family": ("applicant", "respondent")}[area]
    if rng.random() < 0.3 and area == "tenancy":
        p1, p2 = "claimant", "defendant"
    ctx["p1role"], ctx["p2role"] = p1, p2
    parties = {"tenancy": (landlord, ctx["tenant"]),
               "employment": (ctx["employee"], ctx["employer"]),
               "contract": (ctx["buyer"], ctx["seller"]),
               "family": (ctx["mother"], ctx["father"])}[area]
    ctx["party1"], ctx["party2"] = parties
    ctx["matter"] = rng.choice([
        f"{parties[0]} v {parties[1]}", f"the {area} dispute with {parties[1]}",
        f"the {W.town(rng)} {area} matter", f"{parties[0]} (our ref {rng.randint(1000, 9999)})",
    ])
    return ctx


def _court(rng: random.Random, area: str) -> str:
    town = W.town(rng)
    return rng.choice({
        "tenancy": [f"District Court at {town}", f"Housing and Leases Tribunal ({town} Registry)",
                    "High Court of Quellmar"],
        "employment": [f"{town} Employment Tribunal", f"Employment Tribunal ({town} Division)"],
        "contract": ["High Court of Quellmar (Commercial List)", f"District Court at {town}",
                     "High Court of Quellmar"],
        "family": [f"Family Court sitting at {town}", f"Family Court at {town}"],
    }[area])


def _length(rng: random.Random, lo: int = 80, hi: int = 400) -> int:
    if rng.random() < 0.06:                       # a few long documents
        return rng.randint(260, hi - 20)
    return int(lo + (hi - lo) * rng.betavariate(1.15, 5.2))


def _fill(g: Grammar, pools: list[tuple[list[str], float]], target: int) -> list[str]:
    """Draw sentences from several pools (shuffled, no repeats) up to ``target`` words."""
    rng = g.rng
    queues = [(rng.sample(pool, len(pool)), share) for pool, share in pools]
    out: list[str] = []
    for queue, share in queues:
        budget = target * share
        used = 0
        while queue and used < budget:
            sent = g.s(queue.pop())
            out.append(sent)
            used += word_count(sent)
    return out


def _paragraphs(rng: random.Random, sentences: list[str], numbered: bool) -> str:
    paras: list[str] = []
    i = 0
    while i < len(sentences):
        k = rng.choice([1, 2, 2, 3, 3, 4, 5])
        paras.append(" ".join(sentences[i:i + k]))
        i += k
    if numbered:
        paras = [f"{n}. {p}" for n, p in enumerate(paras, 1)]
    return "\n\n".join(paras)


# ---------------------------------------------------------------------------
# Genre builders
# ---------------------------------------------------------------------------
def judgment(g: Grammar, target: int) -> str:
    rng, c = g.rng, g.ctx
    area = c["area"]
    year = rng.randint(2017, 2024)
    header = rng.choice([
        f"IN THE {c['court'].upper()}\nCase No. {W.caseno(rng, year)}\n\nBETWEEN\n{c['party1']}\n{c['p1role'].title()}\nand\n{c['party2']}\n{c['p2role'].title()}\n\nBefore: {c['judge']}\nJudgment handed down: {W.date_str(rng, year, year)}",
        f"{c['party1']} v {c['party2']} [{year}] {rng.choice(['QHC', 'QDC', 'QHL', 'QFC'])} {rng.randint(1, 400)}\n{c['court']}\n{c['judge']}",
        f"JUDGMENT\n\n{c['judge']}:",
        f"{c['court']} - {W.caseno(rng, year)}\nJudgment of {c['judge']} delivered on {W.date_str(rng, year, year)}",
        "",
    ])
    intro = g.pick(JUDGMENT_INTROS[area] + JUDGMENT_INTROS["any"])
    body = _fill(g, [(FACTS[area], 0.5), (REASONING, 0.4), (CONCLUSIONS, 0.1)], target - 30)
    numbered = rng.random() < 0.5
    text = _paragraphs(rng, [intro] + body, numbered)
    return (header + "\n\n" + text).strip()


def appeal(g: Grammar, target: int) -> str:
    rng, c = g.rng, g.ctx
    year = rng.randint(2017, 2024)
    header = rng.choice([
        f"IN THE COURT OF APPEAL OF QUELLMAR\nOn appeal from the {c['court']}\n\n{c['party1']} (Appellant) v {c['party2']} (Respondent)\n\n[{year}] QCA {rng.randint(1, 260)}",
        f"Court of Appeal - Civil Division\n{c['party2']} v {c['party1']}\nHeard: {W.date_str(rng, year, year)}",
        f"SUPREME BENCH OF QUELLMAR\nAppeal No. {W.caseno(rng, year)}",
        f"{c['party1']} v {c['party2']}, Court of Appeal, {year}",
    ])
    body = _fill(g, [(APPEAL[1:], 0.45), (FACTS[c["area"]], 0.3), (REASONING, 0.25)], target - 40)
    body.insert(0, g.s(APPEAL[0]))
    return header + "\n\n" + _paragraphs(rng, body, rng.random() < 0.6)


def tribunal(g: Grammar, target: int) -> str:
    rng, c = g.rng, g.ctx
    c["area"] = "employment"
    town = W.town(rng)
    outcome = rng.choice([
        "The claim of unfair dismissal is well-founded.",
        "The claim of unfair dismissal is not well-founded and is dismissed.",
        "The claims of constructive dismissal and unpaid holiday pay succeed.",
        "The claim for wrongful dismissal succeeds; the remaining claims are dismissed.",
        "The respondent made an unlawful deduction from wages.",
    ])
    header = rng.choice([
        f"EMPLOYMENT TRIBUNAL ({town.upper()})\nClaimant: {c['employee']}\nRespondent: {c['employer']}\nHeard at: {town} on {W.date_str(rng)}\nBefore: Employment Judge {W.surname(rng)}\n\nJUDGMENT\n{outcome}\n\nREASONS",
        f"Case number {W.caseno(rng)} - {c['employee']} v {c['employer']}\n\nReserved judgment of the {town} Employment Tribunal.\n{outcome}",
        f"Tribunal decision: {c['employee']} v {c['employer']} ({town})",
    ])
    body = _fill(g, [(TRIBUNAL, 0.45), (FACTS["employment"], 0.45), (REASONING, 0.1)], target - 30)
    return header + "\n\n" + _paragraphs(rng, body, rng.random() < 0.7)


def tenancy_notice(g: Grammar, target: int) -> str:
    rng, c = g.rng, g.ctx
    c["area"] = "tenancy"
    title, lines = rng.choice(NOTICE_TYPES)
    parts = [title if rng.random() < 0.7 else title.title()]
    parts.append(g.pick(["To: {tenant}\nProperty: {prop}", "To the tenant, {tenant}, of {prop}",
                         "Tenant(s): {tenant}\nAddress of premises: {prop}\nLandlord: {landlord}"]))
    body = [g.s(t) for t in lines]
    rng.shuffle(body)
    extras = g.sample(NOTICE_EXTRA, rng.randint(2, 5))
    body = body[: rng.randint(max(2, len(body) - 2), len(body))]
    if word_count(" ".join(body + extras)) < target * 0.6:
        body += g.sample(FACTS["tenancy"], rng.randint(1, 3))
    parts.append("\n".join(body) if rng.random() < 0.5 else _paragraphs(rng, body, False))
    parts.append("\n".join(extras))
    return "\n\n".join(parts)


def contract_clauses(g: Grammar, target: int) -> str:
    rng = g.rng
    g.ctx["area"] = "contract"
    out = [g.pick(CLAUSE_INTROS)]
    start = rng.randint(1, 14)
    numbering = rng.choice(["{n}.", "Clause {n}", "{n}", "Article {n}"])
    words = word_count(out[0])
    for k, (head, body) in enumerate(rng.sample(CLAUSES, len(CLAUSES))):
        if words > target:
            break
        num = numbering.format(n=start + k)
        text = g.s(body)
        if rng.random() < 0.35:
            text += " " + g.s(rng.choice(CLAUSES)[1].replace("The ", "Further, the ", 1))
        heading = head.upper() if rng.random() < 0.3 else head
        out.append(f"{num} {heading}. {text}" if rng.random() < 0.6 else f"{num} {heading}\n{text}")
        words += word_count(text) + 3
    return "\n\n".join(out)


def memo(g: Grammar, target: int) -> str:
    rng, c = g.rng, g.ctx
    head = rng.choice([
        f"MEMORANDUM\nTo: {W.person(rng)}\nFrom: {c['author']}\nDate: {W.date_str(rng)}\nRe: {c['matter']}",
        f"Internal note - {c['firm']}\nMatter: {c['matter']}\nPrivileged and confidential",
        f"File note ({c['author']}, {W.date_str(rng)})",
        f"To: Litigation team\nSubject: {c['matter']}",
    ])
    body = [g.pick(MEMO_OPEN)] + _fill(g, [(MEMO_BODY, 0.55), (FACTS[c["area"]], 0.45)], target - 40)
    if rng.random() < 0.3:
        bullets = "\n".join("- " + s for s in body[-3:])
        text = _paragraphs(rng, body[:-3], False) + "\n\n" + bullets
    else:
        text = _paragraphs(rng, body, False)
    return f"{head}\n\n{text}\n\n{g.pick(MEMO_CLOSE)}"


def statutory(g: Grammar, target: int) -> str:
    rng, c = g.rng, g.ctx
    area = c["area"]
    title = g.s(rng.choice([t for t in SI_TITLES if area in t[1]] or SI_TITLES)[0])
    c["si_title"] = title
    c["act_parent"] = rng.choice(W.ACTS[area])
    head = g.x(rng.choice(SI_INTROS))
    pre = g.sample(SI_PREAMBLE, rng.randint(1, 2))
    rules = [g.pick(SI_FIRST), g.pick(SI_INTERP)]
    rules += _fill(g, [(SI_RULES[area], 0.6), (SI_COMMON, 0.4)], target - 60)
    style = rng.random()
    paras = []
    for i, s in enumerate(rules, 1):
        if style < 0.4:
            paras.append(f"{i}.—(1) {s}" if rng.random() < 0.5 else f"{i}. {s}")
        elif style < 0.7:
            paras.append(f"Article {i}. {s}" if rng.random() < 0.8 else f"Regulation {i}: {s}")
        else:
            paras.append(f"({chr(96 + min(i, 26))}) {s}")
    note = g.pick(SI_NOTES)
    return "\n\n".join(p for p in [head, "\n".join(pre), "\n".join(paras), note] if p)


def correspondence(g: Grammar, target: int) -> str:
    rng, c = g.rng, g.ctx
    top = g.x(rng.choice(LETTER_OPEN))
    body = _fill(g, [(LETTER_BODY, 0.6), (FACTS[c["area"]], 0.4)], target - 25)
    date_line = W.date_str(rng) if rng.random() < 0.6 else ""
    return "\n\n".join(p for p in [date_line, top, _paragraphs(rng, body, False),
                                   g.x(rng.choice(LETTER_CLOSE))] if p)


GENRES = {
    "judgment": judgment,
    "appeal_ruling": appeal,
    "tribunal_decision": tribunal,
    "tenancy_notice": tenancy_notice,
    "contract_clauses": contract_clauses,
    "firm_memo": memo,
    "statutory_instrument": statutory,
    "correspondence": correspondence,
}
AREA_BIAS = {
    "tribunal_decision": ["employment"],
    "tenancy_notice": ["tenancy"],
    "contract_clauses": ["contract"],
}


def make_document(g: Grammar, genre: str, target: int | None = None,
                  lo: int = 80, hi: int = 400) -> str:
    """One document of ``genre`` with between lo and hi words."""
    return redraw(_make_once, g, genre, target, lo, hi)


def _make_once(g: Grammar, genre: str, target: int | None) -> str:
    rng = g.rng
    area = rng.choice(AREA_BIAS.get(genre, AREAS))
    g.ctx = _context(rng, area)
    year = rng.randint(2016, 2024)
    g.ctx["date"] = lambda r: W.date_str(r, year - 2, year)
    g.ctx["date_past"] = lambda r: W.date_str(r, year - 12, year - 3)
    g.ctx["year"] = lambda r: str(r.randint(year - 4, year))
    target = target or _length(rng)
    g.style = _style.author(rng, "legal", formal=genre not in ("firm_memo", "correspondence"))
    text = GENRES[genre](g, target)
    return "\n".join(tidy_line(line) for line in text.split("\n"))


def tidy_line(line: str) -> str:
    return tidy(line) if line.strip() else ""


def new_grammar(rng: random.Random) -> Grammar:
    return Grammar(rng, slots())
