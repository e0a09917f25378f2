"""Personal-data detection: check digits on published example numbers, detection in text, redaction, modes."""

from __future__ import annotations

import string

import pytest

from adapt.corpus import privacy

# Example IBANs printed in the SWIFT IBAN Registry (the register ISO 13616 designates), one per country (from memory).
REGISTRY_EXAMPLES = ["GB82 WEST 1234 5698 7654 32", "DE89 3704 0044 0532 0130 00", "ES91 2100 0418 4502 0005 1332",
                     "FR14 2004 1010 0505 0001 3M02 606", "NL91 ABNA 0417 1643 00", "BE68 5390 0754 7034",
                     "IT60 X054 2811 1010 0000 0123 456", "PT50 0002 0123 1234 5678 9015 4",
                     "CH93 0076 2011 6238 5295 7", "AT61 1904 3002 3457 3201"]
# Luhn: the worked example 79927398713 (ISO/IEC 7812-1 annex B; from memory) and test card numbers that card
# processors publish for integration testing (from memory).
LUHN_EXAMPLES = ["79927398713", "4111111111111111", "5555555555554444", "378282246310005", "4012888888881881",
                 "6011111111111117"]


def _one_digit_changed(value: str) -> list[str]:
    """Every variant with one digit changed: a single-digit error that MOD 97-10 and Luhn both always detect
    (ISO 7064 clause on MOD 97-10; ISO/IEC 7812-1 annex B)."""
    out = []
    for i, c in enumerate(value):
        if c.isdigit():
            out += [value[:i] + d + value[i + 1:] for d in string.digits if d != c]
    return out


@pytest.mark.parametrize("example", REGISTRY_EXAMPLES)
def test_registry_example_ibans_pass_and_every_one_digit_error_fails(example):
    assert privacy.iban_is_valid(example)
    assert not any(privacy.iban_is_valid(v) for v in _one_digit_changed(example.replace(" ", "")))


def test_iban_must_follow_its_country_layout_in_the_registry():
    # The registry gives each country a BBAN layout (Spain: 20 digits; Brazil: 29 characters in all). Numbers
    # with a correct MOD 97-10 but the wrong layout are not IBANs: a letter in a Spanish BBAN, a short Brazilian one.
    def with_check(country: str, bban: str) -> str:  # ISO 13616 check digits: 98 - (BBAN + country + 00) mod 97
        n = int("".join(str(int(c, 36)) for c in bban + country + "00"))
        return f"{country}{98 - n % 97:02d}{bban}"

    assert privacy.iban_is_valid(with_check("ES", "21000418450200051332"))  # the registry example again
    assert privacy.iban_is_valid(with_check("BR", "00360305000010009795493P1"))
    assert not privacy.iban_is_valid(with_check("ES", "2100041845020005133A"))
    assert not privacy.iban_is_valid(with_check("BR", "00360305000010009795493P"))


@pytest.mark.parametrize("example", LUHN_EXAMPLES)
def test_published_luhn_numbers_pass_and_every_one_digit_error_fails(example):
    assert privacy.luhn_is_valid(example)
    assert not any(privacy.luhn_is_valid(v) for v in _one_digit_changed(example))


def test_dni_and_nie_control_letters():
    # The control letter is TRWAGMYFPDXBNJZSQVHLCKE[number mod 23], with X/Y/Z of an NIE read as 0/1/2
    # (Spanish Ministry of the Interior's published rule; 12345678Z and X1234567L are its usual examples,
    # from memory; worked here: 12345678 = 23 * 536768 + 14 -> Z, 1234567 = 23 * 53676 + 19 -> L).
    assert privacy.dni_is_valid("12345678Z") and privacy.dni_is_valid("12345678-Z")
    assert privacy.nie_is_valid("X1234567L") and privacy.nie_is_valid("X-1234567-L")
    assert not any(privacy.dni_is_valid("12345678" + c) for c in string.ascii_uppercase if c != "Z")
    assert not any(privacy.nie_is_valid("X1234567" + c) for c in string.ascii_uppercase if c != "L")
    assert not privacy.nie_is_valid("12345678Z") and not privacy.dni_is_valid("X1234567L")


def test_detects_each_kind_in_running_text_and_redacts_with_typed_placeholders():
    card = LUHN_EXAMPLES[1]
    spaced_card = " ".join(card[i:i + 4] for i in range(0, 16, 4))
    iban = REGISTRY_EXAMPLES[2].replace(" ", "")
    spaced_iban = REGISTRY_EXAMPLES[2]
    dni = "12345678Z"
    text = (f"Write to odile.marrow@haverrin-post.test or call 01632 960 123 / +34 612 345 678.\n"
            f"Pay into {spaced_iban} or {iban}; card {spaced_card} or {card}.\n"
            f"ID {dni}. Patient DOB 03/04/1961; born on 12 March 1950.\n"
            f"Case QH-2021-0042 heard on 12 March 2021; award 250,000 orins; ref 2021-05-06.")
    found = privacy.find_personal_data(text, privacy.ORDER)
    kinds = privacy.count_kinds(found)
    assert kinds == {"email": 1, "phone": 2, "iban": 2, "card": 2, "dni_nie": 1, "birth_date": 2}
    red = privacy.redact(text, found)
    for secret in ("odile.marrow", "960 123", iban, spaced_iban, card, spaced_card, dni, "1961", "1950"):
        assert secret not in red
    # things that are not personal data stay: case number, hearing date, amount
    for kept in ("QH-2021-0042", "12 March 2021", "250,000 orins", "2021-05-06"):
        assert kept in red
    assert "[EMAIL]" in red and "[IBAN]" in red and "[CARD]" in red and "[BIRTH_DATE]" in red


def test_an_iban_running_into_the_next_word_is_cut_at_its_country_length():
    iban = REGISTRY_EXAMPLES[2]
    found = privacy.find_personal_data(f"pay {iban} AB12 today", ["iban"])
    assert [(f.start, f.end) for f in found] == [(4, 4 + len(iban))]


def test_numbers_with_wrong_check_digits_are_not_reported():
    bad_card = LUHN_EXAMPLES[1][:-1] + "2"
    bad_iban = "ES92" + REGISTRY_EXAMPLES[2].replace(" ", "")[4:]
    text = f"numbers {bad_card} and {bad_iban} and 12345678A"
    assert [f.kind for f in privacy.find_personal_data(text, ["card", "iban", "dni_nie"])] == []


@pytest.mark.parametrize("kinds", [["email"], ["phone", "card"]])
def test_only_requested_kinds_are_reported(kinds):
    text = "mail a@b.example, phone 07700 900123, card 4000 0012 3456 7899"
    assert {f.kind for f in privacy.find_personal_data(text, kinds)} <= set(kinds)


def _filter_with_mode(mode: str):
    from adapt.config.prepare import PrepareJob
    from adapt.corpus.docwork import WorkState, filter_chunk, init_worker

    cfg = PrepareJob(inputs=["unused"])
    cfg.privacy.mode = mode
    cfg.clean.min_words = 3
    init_worker(WorkState(cfg))
    docs = [{"id": "a", "source": "s", "markup_share": 0.0,
             "text": "Reply to odile@haverrin-post.test about the tenancy of the flat and the rent."},
            {"id": "b", "source": "s", "markup_share": 0.0, "text": "No personal data in this tenancy note at all."}]
    return filter_chunk(docs)


@pytest.mark.parametrize("mode", ["report", "redact", "drop", "off"])
def test_privacy_modes(mode):
    res = _filter_with_mode(mode)
    kept = {d["id"]: d["text"] for d in res.kept}
    if mode == "off":
        assert res.counts["pii_email"] == 0 and "odile@" in kept["a"]
        return
    assert res.counts["pii_email"] == 1 and res.counts["docs_with_pii"] == 1
    if mode == "report":
        assert "odile@" in kept["a"]
    elif mode == "redact":
        assert "[EMAIL]" in kept["a"] and "odile@" not in kept["a"]
    else:
        assert "a" not in kept and res.removed[0]["reason"] == "personal_data"
        assert "email x1" in res.removed[0]["detail"]
    assert "b" in kept


def test_clinical_corpus_with_scanning_off_gets_a_loud_warning(caplog):
    from adapt.config.prepare import PrepareJob
    from adapt.corpus.profile_builder import ProfileBuilder

    cfg = PrepareJob(inputs=["unused"], domain="clinical")
    cfg.privacy.mode = "off"
    pb = ProfileBuilder(cfg)
    with caplog.at_level("WARNING"):
        pb._privacy_warnings()
    banner = [r.getMessage() for r in caplog.records if "NOT scanned" in r.getMessage()]
    assert banner and banner[0].count("\n") >= 5  # a multi-line banner, not a line that scrolls past
    assert any("privacy.mode=off" in w for w in pb.warnings)
    cfg.privacy.mode = "redact"
    quiet = ProfileBuilder(cfg)
    quiet._privacy_warnings()
    assert not any("privacy.mode=off" in w for w in quiet.warnings)
    assert any("governance" in w for w in quiet.warnings)  # the usual caution stays for clinical text
