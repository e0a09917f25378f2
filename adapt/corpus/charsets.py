"""Per-language character allow-lists and deny-lists, and the share of disallowed characters in a document.

A character is disallowed when it is on the deny-list or not on the allow-list; ``extra_allowed`` wins over
both. The check is one compiled regular expression per language, so it runs at C speed.
"""

from __future__ import annotations

import re
import unicodedata
from collections import Counter
from dataclasses import dataclass

# (start, end) code point ranges and single characters. Latin letters with accents cover names and loanwords
# (common practice: Latin-1 Supplement and Latin Extended-A letters, without the two maths signs × ÷ there).
LATIN_LETTERS = [(0x41, 0x5A), (0x61, 0x7A), (0xC0, 0xD6), (0xD8, 0xF6), (0xF8, 0xFF), (0x100, 0x17F)]
DIGITS = [(0x30, 0x39)]
ASCII_PUNCT = "!\"#$%&'()*+,-./:;<=>?@[\\]^_`{|}~ \n\t"
TYPOGRAPHY = "‘’‚“”„–—‐‑…•·′″‰‹›«»†‡"
SYMBOLS = "°§¶©®™€£¥¢±×÷µ¼½¾¹²³ªº№←→↑↓≤≥≠≈∞√\ufe0f"

LANGUAGE_EXTRAS = {
    "en": "",
    "es": "¡¿",  # Spanish opening exclamation and question marks
}

# Deny-list shared by both languages: scripts that signal a different language or broken decoding, and symbols
# that are never text. "Ã" and "Â" are Latin letters but, left after mojibake repair, mark broken decoding
# (neither is used in English or Spanish spelling).
DENIED_RANGES = [
    (0x0370, 0x03FF, "Greek"), (0x0400, 0x052F, "Cyrillic"), (0x0590, 0x05FF, "Hebrew"),
    (0x0600, 0x06FF, "Arabic"), (0x0900, 0x097F, "Devanagari"), (0x0E00, 0x0E7F, "Thai"),
    (0x2500, 0x259F, "box drawing"), (0x3040, 0x30FF, "Japanese kana"), (0x4E00, 0x9FFF, "CJK ideographs"),
    (0xAC00, 0xD7AF, "Hangul"), (0xE000, 0xF8FF, "private use"), (0xFFFD, 0xFFFD, "replacement character"),
]
DENIED_CHARS = "ÃÂ"


def _class_items(ranges: list[tuple[int, int]], chars: str) -> str:
    parts = [re.escape(chr(a)) + ("-" + re.escape(chr(b)) if b > a else "") for a, b in ranges]
    parts += [re.escape(c) for c in dict.fromkeys(chars)]
    return "".join(parts)


@dataclass(frozen=True)
class CharsetRules:
    language: str
    extra_allowed: str = ""
    extra_denied: str = ""
    emoji: str = ""

    def allowed_codepoints(self) -> set[int]:
        """Allow-list minus deny-list, plus extra_allowed (which wins over both)."""
        chars = ASCII_PUNCT + TYPOGRAPHY + SYMBOLS + LANGUAGE_EXTRAS[self.language] + self.emoji
        allowed = {c for a, b in LATIN_LETTERS + DIGITS for c in range(a, b + 1)} | {ord(c) for c in chars}
        denied = {ord(c) for c in DENIED_CHARS + self.extra_denied}
        allowed = {c for c in allowed if c not in denied and not any(a <= c <= b for a, b, _ in DENIED_RANGES)}
        return allowed | {ord(c) for c in self.extra_allowed}

    def compile(self) -> re.Pattern:
        """One negated character class, so the search runs at C speed."""
        points = sorted(self.allowed_codepoints())
        ranges, start = [], points[0]
        for prev, cur in zip(points, points[1:] + [None]):
            if cur != prev + 1:
                ranges.append((start, prev))
                start = cur
        return re.compile(f"[^{_class_items(ranges, '')}]")


@dataclass
class CharsetVerdict:
    share: float
    top: list[tuple[str, int]]


def check_charset(text: str, pattern: re.Pattern, top_chars: int) -> CharsetVerdict:
    """Share of disallowed characters among the non-space characters, and the most frequent offenders."""
    bad = pattern.findall(text)
    visible = len(text) - text.count(" ") - text.count("\n")
    if not bad:
        return CharsetVerdict(0.0, [])
    return CharsetVerdict(len(bad) / max(visible, 1), Counter(bad).most_common(top_chars))


def describe_char(ch: str) -> str:
    """'U+0416 Ж CYRILLIC CAPITAL LETTER ZHE' (printable) for reports."""
    name = unicodedata.name(ch, "unnamed")
    shown = ch if ch.isprintable() and not ch.isspace() else ""
    return f"U+{ord(ch):04X} {shown} {name}".replace("  ", " ")


def describe_top(top: list[tuple[str, int]]) -> str:
    return "; ".join(f"{describe_char(c)} x{n}" for c, n in top)
