"""Detect and redact personal data: e-mail, phone, IBAN, payment card, Spanish DNI/NIE, birth dates.

Numbers are only reported when their check digits are right, which keeps case numbers and amounts out of the
findings; the checks are python-stdnum's: IBAN (ISO 13616: the country's BBAN layout from the IBAN registry and
ISO 7064 MOD 97-10; the national bank-code checks are left out, so invented or unregistered banks still count),
cards (Luhn, ISO/IEC 7812-1), DNI/NIE (the mod-23 control letter). Phone numbers are found by pattern alone: the
phonenumbers library found a quarter of the planted numbers of the invented samples (it rejects the fictional
ranges they use) at its VALID level and mistook thousands of years and case numbers for phones at POSSIBLE.

Automated detection is a safety net, not anonymisation: names, addresses and free-text descriptions of people
are not detected. Handling clinical or personal data must follow local law, data-protection rules and the
governance of the institution that holds the data.
"""

from __future__ import annotations

import re
from collections import Counter
from dataclasses import dataclass

from stdnum import iban as _iban
from stdnum import luhn as _luhn
from stdnum.es import dni as _dni
from stdnum.es import nie as _nie

PLACEHOLDERS = {"email": "[EMAIL]", "phone": "[PHONE]", "iban": "[IBAN]", "card": "[CARD]",
                "dni_nie": "[DNI_NIE]", "birth_date": "[BIRTH_DATE]"}
# Priority when spans overlap: the more specific, checksum-validated kinds first.
ORDER = ("email", "iban", "card", "dni_nie", "birth_date", "phone")

EMAIL_RE = re.compile(r"(?<![\w.+-])[A-Za-z0-9._%+-]+@[A-Za-z0-9-]+(?:\.[A-Za-z0-9-]+)*\.[A-Za-z]{2,}\b")
# Each pattern starts with a character class, its left boundary checked by a look-behind after that first
# character: the regex engine can then skip ahead to candidate characters (4-6x faster than a leading \b).
IBAN_RE = re.compile(r"[A-Z](?<!\w[A-Z])[A-Z]\d{2}(?: ?[A-Z0-9]){11,30}\b")
CARD_RE = re.compile(r"\d(?<![\d-]\d)(?:[ -]?\d){12,18}(?![\d-])")
DNI_NIE_RE = re.compile(r"[\dXYZ](?<!\w[\dXYZ])(?:(?<=\d)\d{7}|(?<=[XYZ])-?\d{7})-?[A-Z]\b")
PHONE_RE = re.compile(r"[+(\d](?<![\w+/.-][+(\d])(?:(?<=\+)\d{1,3}[ .-]?(?:\(\d{1,5}\)[ .-]?)?\d{2,5}"
                      r"|(?<=\()\d{1,5}\)[ .-]?\d{2,5}|(?<=\d)\d{1,4})(?:[ .-]\d{2,6}){1,4}(?![\w/-])")
_MONTHS = ("January|February|March|April|May|June|July|August|September|October|November|December|"
           "Jan|Feb|Mar|Apr|Jun|Jul|Aug|Sep|Sept|Oct|Nov|Dec|"
           "enero|febrero|marzo|abril|mayo|junio|julio|agosto|septiembre|octubre|noviembre|diciembre")
_DATE = (rf"(?:\d{{1,2}}[/.-]\d{{1,2}}[/.-](?:\d{{4}}|\d{{2}})|\d{{4}}-\d{{2}}-\d{{2}}"
         rf"|\d{{1,2}}(?:st|nd|rd|th)?\s+(?:de\s+)?(?:{_MONTHS})\.?,?\s+(?:de\s+)?\d{{4}}"
         rf"|(?:{_MONTHS})\.?\s+\d{{1,2}}(?:st|nd|rd|th)?,?\s+\d{{4}})")
BIRTH_RE = re.compile(rf"(?:\b(?:date\s+of\s+birth|birth\s*date|birthday|DOB|born(?:\s+on)?|fecha\s+de\s+nacimiento"
                      rf"|nacid[oa](?:\s+el)?|F\.\s?nac\.?)|\bD\.O\.B\.?)[\s:,]*(?:on\s+|el\s+)?({_DATE})",
                      re.IGNORECASE)


def iban_is_valid(value: str) -> bool:
    """ISO 13616 IBAN (spaces allowed): registry layout of the country and MOD 97-10, without national checks."""
    return _iban.is_valid(value, check_country=False)


def luhn_is_valid(value: str) -> bool:
    return _luhn.is_valid(value)


def dni_is_valid(value: str) -> bool:
    return _dni.is_valid(value)


def nie_is_valid(value: str) -> bool:
    """NIE: X/Y/Z stand for 0/1/2 in front of the seven digits, then the DNI control letter."""
    return _nie.is_valid(value)


def _iban_spans(text: str):
    for m in IBAN_RE.finditer(text):
        raw = m.group(0)
        # the pattern may run on into the next word: keep the longest prefix that is an IBAN (the registry allows
        # one length per country, so at most one prefix passes)
        ends = [i + 1 for i, ch in enumerate(raw) if ch != " "][14:]  # IBANs have at least 15 characters
        for end in reversed(ends):
            if iban_is_valid(raw[:end]):
                yield m.start(), m.start() + end
                break


def _card_spans(text: str):
    for m in CARD_RE.finditer(text):
        digits = re.sub(r"\D", "", m.group(0))
        if 13 <= len(digits) <= 19 and digits[0] in "23456" and luhn_is_valid(digits):
            yield m.span()


def _phone_spans(text: str):
    for m in PHONE_RE.finditer(text):
        s = m.group(0)
        digits = sum(c.isdigit() for c in s)
        seps = sum(c in " .-" for c in s)
        if 9 <= digits <= 15 and (s[0] in "+(0" or seps >= 2):
            yield m.span()


BIRTH_HINTS = ("birth", "dob", "d.o.b", "born", "nacimiento", "nacid", "nac.")


def _spans(kind: str, text: str):
    if kind == "email":
        return (m.span() for m in EMAIL_RE.finditer(text)) if "@" in text else ()
    if kind == "iban":
        return _iban_spans(text)
    if kind == "card":
        return _card_spans(text)
    if kind == "dni_nie":
        return (m.span() for m in DNI_NIE_RE.finditer(text) if dni_is_valid(m.group(0)) or nie_is_valid(m.group(0)))
    if kind == "birth_date":
        lower = text.lower()
        return (m.span(1) for m in BIRTH_RE.finditer(text)) if any(h in lower for h in BIRTH_HINTS) else ()
    return _phone_spans(text)


@dataclass(frozen=True)
class Finding:
    kind: str
    start: int
    end: int


def find_personal_data(text: str, kinds: tuple[str, ...] | list[str]) -> list[Finding]:
    """Non-overlapping findings sorted by position; on overlap the kind earlier in ORDER wins."""
    taken: list[tuple[int, int]] = []
    found: list[Finding] = []
    for kind in ORDER:
        if kind not in kinds:
            continue
        for start, end in _spans(kind, text):
            if any(start < e and s < end for s, e in taken):
                continue
            taken.append((start, end))
            found.append(Finding(kind, start, end))
    return sorted(found, key=lambda f: f.start)


def redact(text: str, findings: list[Finding]) -> str:
    """Replace each finding with its typed placeholder, e.g. [EMAIL]."""
    out, pos = [], 0
    for f in findings:
        out.append(text[pos:f.start])
        out.append(PLACEHOLDERS[f.kind])
        pos = f.end
    out.append(text[pos:])
    return "".join(out)


def count_kinds(findings: list[Finding]) -> Counter:
    return Counter(f.kind for f in findings)


CLINICAL_BANNER = """
################################################################################
#  WARNING: domain=clinical but privacy.mode=off                               #
#  Clinical notes are full of personal data. This corpus was NOT scanned for   #
#  e-mails, phone numbers, IBANs, card numbers, ID numbers or birth dates.     #
#  Do not train on it or share it unless it has been de-identified under the   #
#  rules that apply to you (local law, data-protection rules, the governance   #
#  of the institution holding the data). Turn scanning on: privacy.mode=redact #
################################################################################"""
CLINICAL_CAUTION = ("clinical corpus: automated detection misses names, addresses and free-text identifiers; "
                    "follow local law, data-protection rules and your institution's governance before use")
