"""Personal-data detection: check-digit rules against python-stdnum, detection in text, redaction, modes."""

from __future__ import annotations

import random
import string

import pytest
from stdnum import iban as std_iban
from stdnum import luhn as std_luhn
from stdnum.es import dni as std_dni
from stdnum.es import nie as std_nie

from adapt.corpus import privacy

# BBAN layouts of a few countries (python-stdnum's IBAN registry data, stdnum/iban.dat): n = digit, a = letter.
BBAN_LAYOUTS = {"ES": "n" * 20, "DE": "n" * 18, "PT": "n" * 21, "BE": "n" * 12, "AT": "n" * 16, "PL": "n" * 24,
                "SE": "n" * 20, "GB": "aaaa" + "n" * 14, "NL": "aaaa" + "n" * 10, "FR": "n" * 23}


def _random_bban(rng: random.Random, layout: str) -> str:
    return "".join(rng.choice(string.digits if c == "n" else string.ascii_uppercase) for c in layout)


def _corrupt(rng: random.Random, value: str) -> str:
    """Change one digit, or swap two neighbouring characters."""
    chars = list(value)
    digits = [i for i, c in enumerate(chars) if c.isdigit()]
    if rng.random() < 0.5:
        i = rng.choice(digits)
        chars[i] = rng.choice([d for d in string.digits if d != chars[i]])
    else:
        i = rng.choice(digits[:-1])
        chars[i], chars[i + 1] = chars[i + 1], chars[i]
    return "".join(chars)


def test_iban_verdicts_match_python_stdnum():
    # Reference: python-stdnum stdnum.iban (ISO 13616, MOD 97-10 of ISO 7064); the national BBAN checks are
    # switched off (check_country=False) because we implement only the international rule.
    rng = random.Random(1)
    cases = []
    for _ in range(400):
        cc = rng.choice(sorted(BBAN_LAYOUTS))
        bban = _random_bban(rng, BBAN_LAYOUTS[cc])
        valid = cc + std_iban.calc_check_digits(cc + "00" + bban) + bban
        cases += [valid, _corrupt(rng, valid), valid[:-1], valid + "7"]
    for value in cases:
        assert privacy.iban_is_valid(value) == std_iban.is_valid(value, check_country=False), value
    assert sum(map(privacy.iban_is_valid, cases)) >= 400  # the valid ones are recognised, not only rejected


def test_luhn_verdicts_match_python_stdnum():
    # Reference: python-stdnum stdnum.luhn (Luhn mod-10, ISO/IEC 7812-1 annex B).
    rng = random.Random(2)
    cases = []
    for _ in range(500):
        body = "".join(rng.choice(string.digits) for _ in range(rng.randint(12, 18)))
        valid = body + std_luhn.calc_check_digit(body)
        cases += [valid, _corrupt(rng, valid), "".join(rng.choice(string.digits) for _ in range(16))]
    for value in cases:
        assert privacy.luhn_is_valid(value) == std_luhn.is_valid(value), value


def test_dni_and_nie_verdicts_match_python_stdnum():
    # Reference: python-stdnum stdnum.es.dni and stdnum.es.nie (mod-23 control letter).
    rng = random.Random(3)
    for _ in range(500):
        digits = f"{rng.randint(0, 99_999_999):08d}"
        dni = digits + std_dni.calc_check_digit(digits)
        wrong = digits + rng.choice([c for c in privacy.DNI_LETTERS if c != dni[-1]])
        for value in (dni, wrong, _corrupt(rng, dni)):
            assert privacy.dni_is_valid(value) == std_dni.is_valid(value), value
        body = rng.choice("XYZ") + f"{rng.randint(0, 9_999_999):07d}"
        nie = body + std_nie.calc_check_digit(body)
        nie_wrong = body + rng.choice([c for c in privacy.DNI_LETTERS if c != nie[-1]])
        for value in (nie, nie_wrong):
            assert privacy.nie_is_valid(value) == std_nie.is_valid(value), value


def _valid_card(rng: random.Random) -> str:
    body = "4" + "".join(rng.choice(string.digits) for _ in range(14))
    return body + std_luhn.calc_check_digit(body)  # python-stdnum computes the check digit


def test_detects_each_kind_in_running_text_and_redacts_with_typed_placeholders():
    rng = random.Random(4)
    card = _valid_card(rng)
    spaced_card = " ".join(card[i:i + 4] for i in range(0, 16, 4))
    bban = "2100041845" + "0200051332"
    iban = "ES" + std_iban.calc_check_digits("ES00" + bban) + bban
    spaced_iban = " ".join(iban[i:i + 4] for i in range(0, len(iban), 4))
    dni = "12345678" + std_dni.calc_check_digit("12345678")
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


def test_numbers_with_wrong_check_digits_are_not_reported():
    rng = random.Random(5)
    card = _valid_card(rng)
    bad_card = card[:-1] + str((int(card[-1]) + 1) % 10)
    bban = "12345678901234567890"
    iban = "ES" + std_iban.calc_check_digits("ES00" + bban) + bban
    bad_iban = iban[:4] + ("1" if iban[4] != "1" else "2") + iban[5:]
    text = f"numbers {bad_card} and {bad_iban} and 12345678A"
    assert not std_luhn.is_valid(bad_card) and not std_iban.is_valid(bad_iban)  # python-stdnum agrees
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
