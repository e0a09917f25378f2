"""Text normalisation of one document, and removal of boilerplate lines repeated across documents.

``normalise_text`` is pure and per-document (it runs in worker processes): mojibake repair, markup to text,
Unicode NFC, control and invisible format characters removed, whitespace tidied with paragraphs kept.
Boilerplate needs the whole corpus: ``line_keys`` gives each document's line hashes, the caller counts them,
and ``remove_lines`` drops the lines whose hash was frequent.
"""

from __future__ import annotations

import hashlib
import html
import re
import unicodedata
from dataclasses import dataclass
from html.parser import HTMLParser

import numpy as np

TAG_RE = re.compile(r"<(?:[a-zA-Z][a-zA-Z0-9-]*(?:\s[^<>]*)?/?|/[a-zA-Z][a-zA-Z0-9-]*\s*|!--.*?--|![a-zA-Z][^<>]*)>",
                    re.DOTALL)
ENTITY_RE = re.compile(r"&(?:[a-zA-Z]{2,8}|#[0-9]{1,7}|#x[0-9a-fA-F]{1,6});")
# C0/C1 controls except tab and newline, DEL, zero-width and other invisible format characters, BOM, soft hyphen.
CONTROL_RE = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f\u00ad\u200b-\u200d\u2060-\u2064\ufeff]")
SPACE_RE = re.compile(r"[ \t\u00a0\u1680\u2000-\u200a\u202f\u205f\u3000]+")
BLANKS_RE = re.compile(r"\n{3,}")
# Cheap pre-check for UTF-8 read as cp1252: a lead byte (Â..ô) followed by 1-3 continuation bytes (0x80-0xBF in
# cp1252). cp1252 leaves 0x81, 0x8D, 0x8F, 0x90 and 0x9D undefined; lenient decoders keep them as the C1 control of
# the same number (WHATWG Encoding Standard, index-windows-1252), so those count as continuation bytes too.
_CP1252_UNDEFINED = "\x81\x8d\x8f\x90\x9d"
_CONT = bytes(range(0x80, 0xC0)).decode("cp1252", errors="ignore") + _CP1252_UNDEFINED
MOJIBAKE_RE = re.compile("[\u00c2-\u00f4][" + re.escape(_CONT) + "]{1,3}")
# Runs between ASCII white space: mojibake never spans one, while U+00A0 (the second byte of "à" read as cp1252)
# stays inside the run.
_RUN_RE = re.compile(r"[^ \t\n\r]+")

SKIP_TAGS = {"script", "style", "noscript", "template", "svg", "head", "nav"}
BLOCK_TAGS = {"p", "div", "br", "li", "tr", "td", "th", "h1", "h2", "h3", "h4", "h5", "h6", "section", "article",
              "header", "footer", "table", "ul", "ol", "blockquote", "pre", "hr", "dd", "dt", "main", "aside"}


class _TextExtractor(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.parts: list[str] = []
        self.skip_depth = 0

    def handle_starttag(self, tag, attrs):  # noqa: ANN001 - HTMLParser's signature
        if tag in SKIP_TAGS:
            self.skip_depth += 1
        elif tag in BLOCK_TAGS:
            self.parts.append("\n")

    def handle_startendtag(self, tag, attrs):  # noqa: ANN001
        if tag in BLOCK_TAGS:
            self.parts.append("\n")

    def handle_endtag(self, tag):  # noqa: ANN001
        if tag in SKIP_TAGS:
            self.skip_depth = max(0, self.skip_depth - 1)
        elif tag in BLOCK_TAGS:
            self.parts.append("\n")

    def handle_data(self, data):  # noqa: ANN001
        if not self.skip_depth:
            self.parts.append(data)


def markup_to_text(text: str) -> str:
    """Text content of HTML/XML (stdlib html.parser); plain text with entities only is unescaped."""
    if TAG_RE.search(text):
        parser = _TextExtractor()
        parser.feed(text)
        parser.close()
        return "".join(parser.parts)
    if ENTITY_RE.search(text):
        return html.unescape(text)
    return text


def undo_mojibake(text: str) -> tuple[str, int]:
    """Undo UTF-8 bytes that were decoded as cp1252, once or several times ("Ã©" and "ÃƒÂ©" -> "é", "â€™" -> "’");
    returns (text, repairs). ftfy repairs each run of non-space characters that the pre-check flags, so text that
    mixes intact and broken words is repaired word by word; repairs counts the flagged sequences in repaired runs."""
    if not MOJIBAKE_RE.search(text):
        return text, 0
    import ftfy  # 0.15 s to import: only once a document is flagged

    count = 0

    def fix(m: re.Match) -> str:
        nonlocal count
        run = m.group(0)
        if not MOJIBAKE_RE.search(run):
            return run
        fixed = ftfy.fix_encoding(run)
        if fixed != run:
            count += len(MOJIBAKE_RE.findall(run))
        return fixed

    return _RUN_RE.sub(fix, text), count


@dataclass
class CleanResult:
    text: str
    markup_share: float  # share of characters that were markup
    control_chars: int
    mojibake_repairs: int


def normalise_text(text: str, strip_markup: bool = True, repair_mojibake: bool = True) -> CleanResult:
    repairs = 0
    if repair_mojibake:
        text, repairs = undo_mojibake(text)
    before = len(text)
    if strip_markup:
        text = markup_to_text(text)
    markup_share = max(0.0, 1.0 - len(text) / before) if before else 0.0
    text = unicodedata.normalize("NFC", text)
    text = text.replace("\r\n", "\n").replace("\r", "\n").replace("\u2028", "\n").replace("\u2029", "\n\n")
    n_before = len(text)
    text = CONTROL_RE.sub("", text)
    controls = n_before - len(text)
    lines = [SPACE_RE.sub(" ", ln).strip() for ln in text.split("\n")]
    text = BLANKS_RE.sub("\n\n", "\n".join(lines)).strip()
    return CleanResult(text, markup_share, controls, repairs)


def fold_text(text: str) -> str:
    """Lower-cased, whitespace runs made one space, trimmed: the form lines and documents are compared in."""
    return " ".join(text.lower().split())


def hash64(text: str) -> int:
    return int.from_bytes(hashlib.blake2b(text.encode("utf-8"), digest_size=8).digest(), "little")


def document_key(text: str) -> int:
    """Exact-duplicate key of a cleaned document: copies differing only in case or whitespace share it."""
    return hash64(fold_text(text))


def line_keys(text: str, min_line_chars: int) -> np.ndarray:
    """Distinct 64-bit hashes of the document's lines long enough to count as boilerplate candidates."""
    keys = {hash64(k) for k in (fold_text(ln) for ln in text.split("\n")) if len(k) >= min_line_chars}
    return np.fromiter(keys, dtype=np.uint64, count=len(keys))


def frequent_lines(all_keys: np.ndarray, num_docs: int, min_docs: int, min_doc_share: float) -> frozenset[int]:
    """Hashes of lines found in at least min_docs OR at least min_doc_share * num_docs distinct documents
    (a criterion set to 0 is off; never fewer than 2 documents)."""
    cutoffs = ([min_docs] if min_docs > 0 else []) + ([int(np.ceil(min_doc_share * num_docs))] if min_doc_share > 0
                                                      else [])
    if all_keys.size == 0 or not cutoffs:
        return frozenset()
    cutoff = max(min(cutoffs), 2)
    keys, counts = np.unique(all_keys, return_counts=True)
    return frozenset(int(k) for k in keys[counts >= cutoff])


def remove_lines(text: str, frequent: frozenset[int], min_line_chars: int) -> tuple[str, int]:
    """Drop lines whose hash is in ``frequent``; returns (text, lines removed)."""
    if not frequent:
        return text, 0
    kept, removed = [], 0
    for ln in text.split("\n"):
        k = fold_text(ln)
        if len(k) >= min_line_chars and hash64(k) in frequent:
            removed += 1
            continue
        kept.append(ln)
    if not removed:
        return text, 0
    return BLANKS_RE.sub("\n\n", "\n".join(kept)).strip(), removed


def count_words(text: str) -> int:
    return len(text.split())
