"""The invented world shared by all generators.

Everything here is made up for the sample data: the Republic of Quellmar,
its towns, courts, statutes and law firms, the Orlindhal General Infirmary
and its staff, the drugs, companies and people.  Personal identifiers are
synthetic values that merely pass the usual checksum rules so that a later
cleaning stage has something realistic to detect.
"""

from __future__ import annotations

import datetime as _dt
import random
import unicodedata

import _data

# Names of the invented world (places, people, firms, statutes, courts, hospitals, drugs) in
# data/world.json; FEMALE is the set of first names that take Ms and she.
(
    COUNTRY, COUNTRY_SHORT, CAPITAL, CURRENCY, TOWNS, FIRST_NAMES, FEMALE, ACCENTED_FIRST, SURNAMES,
    ACCENTED_SURNAMES, LAW_FIRMS, INDUSTRIES, COMPANY_SUFFIX, STREET_NAMES, STREET_KINDS, MONTHS, ACTS,
    COURT_CODES, HOSPITALS, WARDS, GP_PRACTICES, DRUGS, DRUG_CLASSES, EMAIL_DOMAINS,
) = _data.tables("world", """
    COUNTRY COUNTRY_SHORT CAPITAL CURRENCY TOWNS FIRST_NAMES FEMALE ACCENTED_FIRST SURNAMES
    ACCENTED_SURNAMES LAW_FIRMS INDUSTRIES COMPANY_SUFFIX STREET_NAMES STREET_KINDS MONTHS ACTS
    COURT_CODES HOSPITALS WARDS GP_PRACTICES DRUGS DRUG_CLASSES EMAIL_DOMAINS
""")
FEMALE = set(FEMALE)
HOSPITAL = HOSPITALS[0]


# -- helpers ---------------------------------------------------------------------
def ascii_fold(text: str) -> str:
    norm = unicodedata.normalize("NFKD", text)
    return "".join(c for c in norm if not unicodedata.combining(c))


def first_name(rng: random.Random) -> str:
    return rng.choice(FIRST_NAMES)


def surname(rng: random.Random) -> str:
    return rng.choice(SURNAMES)


def person(rng: random.Random) -> str:
    return f"{first_name(rng)} {surname(rng)}"


def titled(rng: random.Random, name: str | None = None) -> str:
    """'Ms Oskeby', 'Mr Vantrell', 'Dr Lusk' ... from a full name."""
    name = name or person(rng)
    first, last = name.split(" ", 1)
    if rng.random() < 0.12:
        return f"Dr {last}"
    return f"{'Ms' if first in FEMALE else 'Mr'} {last}"


def pronoun(name: str) -> str:
    return "she" if name.split(" ")[0] in FEMALE else "he"


def town(rng: random.Random) -> str:
    return rng.choice(TOWNS)


def company(rng: random.Random) -> str:
    base = rng.choice([rng.choice(TOWNS), rng.choice(SURNAMES),
                       rng.choice(STREET_NAMES).replace("'s", "")])
    industry = rng.choice(INDUSTRIES)
    suffix = rng.choice(COMPANY_SUFFIX)
    if industry.endswith(("Holdings", "Group", "Cooperative", "Guild", "Board")):
        suffix = "Ltd" if rng.random() < 0.5 else ""
    return f"{base} {industry} {suffix}".strip()


def address(rng: random.Random) -> str:
    flat = f"Flat {rng.randint(1, 24)}, " if rng.random() < 0.3 else ""
    return (f"{flat}{rng.randint(1, 180)} {rng.choice(STREET_NAMES)} "
            f"{rng.choice(STREET_KINDS)}, {rng.choice(TOWNS)}")


def rand_date(rng: random.Random, lo: int = 2015, hi: int = 2024) -> _dt.date:
    start = _dt.date(lo, 1, 1).toordinal()
    end = _dt.date(hi, 12, 31).toordinal()
    return _dt.date.fromordinal(rng.randint(start, end))


def fmt_date(d: _dt.date, style: int) -> str:
    if style == 0:
        return f"{d.day} {MONTHS[d.month - 1]} {d.year}"
    if style == 1:
        return f"{d.day:02d}/{d.month:02d}/{d.year}"
    if style == 2:
        return d.isoformat()
    if style == 3:
        return f"{MONTHS[d.month - 1]} {d.day}, {d.year}"
    return f"{d.day} {MONTHS[d.month - 1][:3]} {d.year}"


def date_str(rng: random.Random, lo: int = 2015, hi: int = 2024) -> str:
    return fmt_date(rand_date(rng, lo, hi), rng.choice([0, 0, 0, 1, 4]))


def amount(rng: random.Random, lo: int = 400, hi: int = 250_000) -> str:
    value = int(lo * (hi / lo) ** rng.random())
    if value > 1000:
        value = round(value, -1 if value < 10_000 else -2)
    style = rng.random()
    if style < 0.6:
        return f"{value:,} {CURRENCY}"
    if style < 0.85:
        return f"ORN {value:,}"
    return f"{value:,}.{rng.randint(0, 99):02d} {CURRENCY}"


def small_amount(rng: random.Random) -> str:
    return amount(rng, 40, 2400)


def caseno(rng: random.Random, year: int | None = None) -> str:
    year = year or rng.randint(2016, 2024)
    prefix = rng.choice(["QH", "CV", "ET", "FC", "HL", "CA", "DC"])
    return f"{prefix}-{year}-{rng.randint(1, 9999):04d}"


def citation(rng: random.Random) -> str:
    a = surname(rng)
    b = rng.choice([surname(rng), company(rng)])
    code = rng.choice(list(COURT_CODES))
    return f"{a} v {b} [{rng.randint(1989, 2023)}] {code} {rng.randint(1, 420)}"


def ages(rng: random.Random, n: int) -> str:
    vals = sorted(rng.sample(range(2, 17), n), reverse=True)
    if n == 1:
        return str(vals[0])
    return ", ".join(str(v) for v in vals[:-1]) + f" and {vals[-1]}"


def hospital_number(rng: random.Random) -> str:
    return f"OGI{rng.randint(100000, 999999)}"


# -- synthetic personal identifiers ------------------------------------------
DNI_LETTERS = "TRWAGMYFPDXBNJZSQVHLCKE"


def dni(rng: random.Random) -> str:
    number = rng.randint(10_000_000, 99_999_999)
    return f"{number:08d}{DNI_LETTERS[number % 23]}"


def dni_valid(value: str) -> bool:
    value = value.replace("-", "")
    return (len(value) == 9 and value[:8].isdigit()
            and DNI_LETTERS[int(value[:8]) % 23] == value[8])


def _es_dc(digits: str) -> str:
    weights = [1, 2, 4, 8, 5, 10, 9, 7, 3, 6]
    total = sum(int(d) * w for d, w in zip(digits, weights))
    d = 11 - total % 11
    return str({11: 0, 10: 1}.get(d, d))


def _iban_numeric(text: str) -> int:
    return int("".join(str(int(c, 36)) for c in text))


def iban_es(rng: random.Random, spaced: bool = False) -> str:
    bank = f"{rng.randint(0, 9999):04d}"
    branch = f"{rng.randint(0, 9999):04d}"
    account = f"{rng.randint(0, 10**10 - 1):010d}"
    bban = bank + branch + _es_dc("00" + bank + branch) + _es_dc(account) + account
    check = 98 - _iban_numeric(bban + "ES00") % 97
    iban = f"ES{check:02d}{bban}"
    if spaced:
        iban = " ".join(iban[i:i + 4] for i in range(0, len(iban), 4))
    return iban


def iban_valid(value: str) -> bool:
    value = value.replace(" ", "")
    return _iban_numeric(value[4:] + value[:4]) % 97 == 1


def luhn_digit(partial: str) -> str:
    total = 0
    for i, ch in enumerate(reversed(partial)):
        d = int(ch)
        if i % 2 == 0:
            d *= 2
            if d > 9:
                d -= 9
        total += d
    return str((10 - total % 10) % 10)


def luhn_valid(number: str) -> bool:
    digits = number.replace(" ", "").replace("-", "")
    return luhn_digit(digits[:-1]) == digits[-1]


def card_number(rng: random.Random) -> str:
    partial = rng.choice(["4000", "4000 00", "4000 12"]).replace(" ", "")
    partial += "".join(str(rng.randint(0, 9)) for _ in range(15 - len(partial)))
    number = partial + luhn_digit(partial)
    if rng.random() < 0.6:
        return " ".join(number[i:i + 4] for i in range(0, 16, 4))
    return number


def email(rng: random.Random, name: str | None = None) -> str:
    name = ascii_fold(name or person(rng)).lower()
    first, last = name.split(" ", 1)
    last = last.replace(" ", "").replace("-", "")
    local = rng.choice([f"{first}.{last}", f"{first[0]}{last}", f"{last}.{first[0]}",
                        f"{first}{rng.randint(1, 99)}"])
    return f"{local}@{rng.choice(EMAIL_DOMAINS)}"


def phone(rng: random.Random) -> str:
    kind = rng.random()
    if kind < 0.4:
        return f"01632 960 {rng.randint(0, 999):03d}"
    if kind < 0.7:
        return f"07700 900{rng.randint(0, 999):03d}"
    return f"+34 6{rng.randint(10, 99)} {rng.randint(0, 999):03d} {rng.randint(0, 999):03d}"


def birth_date(rng: random.Random) -> str:
    d = rand_date(rng, 1931, 2004)
    style = rng.randrange(4)
    if style == 0:
        return f"DOB {d.day:02d}/{d.month:02d}/{d.year}"
    if style == 1:
        return f"born on {d.day} {MONTHS[d.month - 1]} {d.year}"
    if style == 2:
        return f"date of birth {d.day:02d}.{d.month:02d}.{d.year}"
    return f"D.O.B. {d.isoformat()}"


def base_slots() -> dict:
    """Slots every grammar can use."""
    return {
        "person": person,
        "surname": surname,
        "first": first_name,
        "town": town,
        "company": company,
        "addr": address,
        "date": date_str,
        "date_past": lambda r: date_str(r, 2005, 2019),
        "month": lambda r: r.choice(MONTHS),
        "year": lambda r: str(r.randint(2012, 2024)),
        "amt": amount,
        "amt_small": small_amount,
        "n": lambda r: str(r.randint(2, 28)),
        "n_small": lambda r: r.choice(["two", "three", "four", "five", "six"]),
        "pct": lambda r: f"{r.randint(3, 60)} per cent",
        "citation": citation,
        "caseno": caseno,
        "sec": lambda r: f"{r.randint(2, 94)}{r.choice(['', '', '', '(1)', '(2)', '(3)(b)', 'A'])}",
        "clause": lambda r: f"{r.randint(2, 24)}.{r.randint(1, 9)}",
        "hour": lambda r: f"{r.randint(0, 23):02d}{r.choice(['00', '15', '30', '45', '10', '50'])}",
    }
