"""Text normalisation, markup stripping, mojibake repair, boilerplate lines, character sets."""

from __future__ import annotations

import json
import unicodedata

import numpy as np
import pytest

from adapt.corpus import charsets, cleaning


def test_nfc_controls_and_whitespace():
    decomposed = "Cafe\u0301  tenant\u00a0\u00a0notice\u200b\x07\r\n\n\n\n  next\tline  "
    r = cleaning.normalise_text(decomposed)
    assert r.text == "Café tenant notice\n\nnext line"
    assert unicodedata.is_normalized("NFC", r.text)  # Unicode Standard Annex #15 (NFC)
    assert r.control_chars == 2  # BEL and the zero-width space


def test_html_is_stripped_to_its_text():
    page = ("<html><head><title>t</title><style>p{color:red}</style></head><body><nav>Home | About</nav>"
            "<p>The tenant&nbsp;paid &amp; left.</p><script>var x = 1;</script><div>Second</div></body></html>")
    r = cleaning.normalise_text(page)
    assert r.text == "The tenant paid & left.\n\nSecond"  # blocks become paragraphs; &nbsp; becomes a space
    assert "color" not in r.text and "var x" not in r.text and "Home" not in r.text
    assert r.markup_share > 0.5
    plain = "a < b and c > d, costs 5 <10"
    assert cleaning.normalise_text(plain).text == plain  # comparison signs are not markup


def test_mojibake_is_repaired():
    broken = "café’s résumé".encode("utf-8").decode("cp1252")  # UTF-8 read as cp1252
    assert broken != "café’s résumé"
    text, n = cleaning.undo_mojibake(broken)
    assert text == "café’s résumé" and n == 4  # é, ’, é, é
    assert cleaning.undo_mojibake("São Paulo, año, Ångström")[1] == 0  # real accented text is left alone


def test_mojibake_with_bytes_cp1252_leaves_undefined_is_repaired():
    # ” is E2 80 9D in UTF-8; cp1252 defines no character for 0x9D (nor 0x81, 0x8D, 0x8F, 0x90), and decoders that
    # do not fail pass such bytes through as the C1 control of the same number (WHATWG Encoding Standard,
    # index-windows-1252; from memory), so the mojibake of “see attached” ends in "â€" + U+009D
    broken = "“see attached” – Ramón".encode("utf-8").decode("cp1252", errors="replace").replace("\ufffd", "\x9d")
    assert "\x9d" in broken
    text, n = cleaning.undo_mojibake(broken)
    assert text == "“see attached” – Ramón" and n == 4
    assert cleaning.normalise_text(broken).text == "“see attached” – Ramón"


_CP1252_UNDEFINED = (0x81, 0x8D, 0x8F, 0x90, 0x9D)


def _as_windows_1252(data: bytes) -> str:
    """Bytes decoded as windows-1252 the way browsers and lenient decoders do it: the WHATWG Encoding Standard's
    index-windows-1252 maps the five bytes the code page leaves undefined to the C1 control of the same number
    (U+0081, U+008D, U+008F, U+0090, U+009D), as ISO-8859-1 does; every other byte as Python's cp1252 codec."""
    return "".join(chr(b) if b in _CP1252_UNDEFINED else bytes([b]).decode("cp1252") for b in data)


def _garble(text: str) -> str:
    return _as_windows_1252(text.encode("utf-8"))


# Á Í Ï Ð Ý are C3 81, C3 8D, C3 8F, C3 90, C3 9D in UTF-8: their second byte is one cp1252 leaves undefined.
UPPER_CASE_SPANISH = ["ÍNDICE GENERAL DEL EXPEDIENTE", "ÁMBITO DE APLICACIÓN Y DISPOSICIÓN ÚNICA",
                      "ANEXO Ï, SECCIÓN Ð, APARTADO Ý", "CAPÍTULO ÚNICO. ÁREA DE URGENCIAS: ÍNDICE DE GRAVEDAD"]


@pytest.mark.parametrize("original", UPPER_CASE_SPANISH)
@pytest.mark.parametrize("how", ["once", "twice", "beside intact text"])
def test_mojibake_of_letters_with_undefined_cp1252_bytes_is_repaired(original, how):
    # Reference: ftfy's documented behaviour (fix_encoding undoes UTF-8 decoded as windows-1252, the undefined
    # bytes kept as C1 controls, and several layers of it at once) and the WHATWG windows-1252 table above.
    broken = {"once": _garble(original), "twice": _garble(_garble(original)),
              "beside intact text": original + " / " + _garble(original)}[how]
    want = original if how != "beside intact text" else original + " / " + original
    assert broken != want
    cleaned = cleaning.normalise_text(broken)
    assert cleaned.text == want and cleaned.mojibake_repairs > 0
    # and the Spanish character-set filter no longer sees broken decoding in it
    assert charsets.check_charset(cleaned.text, charsets.CharsetRules("es").compile(), 3).share == 0.0


def test_boilerplate_lines_are_found_by_document_frequency():
    footer = "CONFIDENTIAL: this message is for the named recipient only and may be privileged."
    docs = [f"Body text number {i} about a tenancy dispute and rent arrears.\n{footer}" for i in range(12)]
    docs += [f"Another body {i} without the footer but long enough to count." for i in range(8)]
    keys = np.concatenate([cleaning.line_keys(d, 40) for d in docs])
    frequent = cleaning.frequent_lines(keys, len(docs), min_docs=10, min_doc_share=0.0)
    assert len(frequent) == 1
    text, removed = cleaning.remove_lines(docs[0], frequent, 40)
    assert removed == 1 and footer not in text and text.startswith("Body text number 0")
    # either criterion is enough: in 12 of 20 documents = 60% >= 50%
    assert len(cleaning.frequent_lines(keys, len(docs), min_docs=0, min_doc_share=0.5)) == 1
    assert len(cleaning.frequent_lines(keys, len(docs), min_docs=13, min_doc_share=0.0)) == 0


@pytest.mark.parametrize("language,text,ok", [
    ("en", "The tenant, Mr Ørsted, paid €1,200 (“in full”) — 100% on time… 🙂", True),
    ("es", "¿Pagó el inquilino? ¡Sí! La señora Núñez pagó 1.200 € el día 3.º", True),
    ("en", "¿Pagó el inquilino?", False),  # Spanish marks are not in the English allow-list
    ("en", "Привет мир", False),
    ("en", "Text with a replacement char \ufffd here", False),
])
def test_charset_allow_and_deny_lists(language, text, ok):
    pattern = charsets.CharsetRules(language, emoji="🙂").compile()
    verdict = charsets.check_charset(text, pattern, top_chars=3)
    assert (verdict.share == 0.0) == ok


def test_charset_share_top_offenders_and_extra_allowed():
    text = "Patient given β-blocker and α agonist; dose 5 μg."
    rules = charsets.CharsetRules("en")
    v = charsets.check_charset(text, rules.compile(), top_chars=2)
    assert v.share == pytest.approx(3 / (len(text) - text.count(" ")))
    assert {c for c, _ in v.top} <= {"β", "α", "μ"} and len(v.top) == 2
    assert "GREEK" in charsets.describe_char("β")
    relaxed = charsets.CharsetRules("en", extra_allowed="αβμ").compile()  # extra_allowed wins over the deny-list
    assert charsets.check_charset(text, relaxed, 2).share == 0.0
    strict = charsets.CharsetRules("en", extra_denied=";").compile()
    assert charsets.check_charset("a;b", strict, 2).share > 0


def test_document_key_ignores_case_and_whitespace_only():
    key = cleaning.document_key("The Tenant  paid\nthe rent.")
    assert key == cleaning.document_key("  the tenant paid the\t\tRENT. ")
    assert key != cleaning.document_key("The tenant paid the rent")
    assert cleaning.document_key("a b") == cleaning.hash64(cleaning.fold_text("a  B"))


def test_both_prepare_passes_key_documents_with_document_key(tmp_path, monkeypatch):
    """Pass A (distinct documents for boilerplate counting) and pass B (exact-duplicate hashes) must agree."""
    import sys

    from adapt.config.prepare import PrepareJob, PrepareRuntimeConfig
    from adapt.corpus import docwork
    from adapt.corpus.engine import LocalEngine
    from adapt.corpus.profile_builder import ProfileBuilder
    from adapt.corpus.readers import ReadStats
    from adapt.corpus.shards import Spill
    from adapt.stages import prepare

    callers = []
    real = cleaning.document_key

    def spy(text: str) -> int:
        callers.append(sys._getframe(1).f_code.co_name)
        return real(text)

    monkeypatch.setattr(cleaning, "document_key", spy)
    texts = ["The tenant paid the rent on time.", "the TENANT paid  the rent\non time."]
    (tmp_path / "docs.jsonl").write_text("".join(json.dumps({"text": t}) + "\n" for t in texts))
    cfg = PrepareJob(inputs=[str(tmp_path / "docs.jsonl")], runtime=PrepareRuntimeConfig(progress=False))
    cfg.clean.min_words = 1
    spill = Spill(tmp_path / "a.parquet", prepare.NORMALISED)
    _, distinct = prepare._pass_a(cfg, LocalEngine(cfg), spill, ProfileBuilder(cfg), ReadStats())
    spill.close()
    docwork.init_worker(docwork.WorkState(cfg))
    rows = [{**r, "words": cleaning.count_words(r["text"])} for batch in spill.batches(10) for r in batch]
    kept = docwork.filter_chunk(rows).kept
    assert distinct == 1 and len(kept) == 2 and kept[0]["doc_hash"] == kept[1]["doc_hash"]
    assert set(callers) == {"_pass_a", "filter_chunk"}
