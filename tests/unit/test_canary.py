"""Canary audit mechanics: the exposure estimate against worked values, the secret's PLL against a one-copy-at-a-
time reference, and an audit that tells a memorised secret from secrets the model never saw."""

from __future__ import annotations

import math

import pytest
import torch
from transformers import AutoModelForMaskedLM, AutoTokenizer

from adapt.evaluation.canary import (SECRET_DIGITS, candidates, canary_text, exposure, make_canaries,
                                     secret_scores)


def test_exposure_worked_values():
    # Carlini et al. 2019 §4 (from memory): exposure = log2|R| - log2 rank; with n sampled others the space is the
    # n + 1 secrets scored, so rank 1 of 1,024 gives 10 bits and the last rank gives 0
    assert exposure(5.0, [1.0] * 1023) == {"rank": 1, "candidates": 1023, "exposure": 10.0, "max_exposure": 10.0}
    assert exposure(0.0, [1.0] * 1023)["exposure"] == 0.0
    # ties count against the secret: 3 candidates score as high, so rank 4 of 8 -> log2(8) - log2(4) = 1 bit
    assert exposure(2.0, [2.0, 3.0, 2.0, 1.0, 0.0, 0.0, 0.0])["exposure"] == pytest.approx(1.0)


def test_canaries_are_distinct_and_controls_never_planted():
    cans = make_canaries([1, 4], per_repeat=2, controls=3, seed=0)
    assert [c.repeats for c in cans] == [1, 1, 4, 4, 0, 0, 0]
    assert len({c.tag for c in cans}) == len(cans)
    assert all(len(c.secret.split()) == SECRET_DIGITS and c.secret.replace(" ", "").isdigit() for c in cans)
    assert make_canaries([1, 4], 2, 3, seed=0) == cans and make_canaries([1, 4], 2, 3, seed=1) != cans
    others = candidates(cans[0], 50, seed=0)
    assert len(others) == 50 and cans[0].secret not in others and candidates(cans[0], 50, seed=0) == others


@pytest.fixture
def tiny(tiny_encoder):
    torch.manual_seed(0)
    return AutoModelForMaskedLM.from_pretrained(tiny_encoder), AutoTokenizer.from_pretrained(tiny_encoder)


def test_secret_pll_equals_masking_one_token_at_a_time(tiny):
    model, tok = tiny
    model.eval()
    secrets = ["1 2 3 4 5 6", "9 0 9 0 9 0"]
    got = secret_scores(model, tok, "abcdef", secrets, batch_size=4)
    for secret, value in zip(secrets, got):  # reference: one unpadded forward pass per masked secret token
        text = canary_text("abcdef", secret)
        enc = tok(text, return_offsets_mapping=True)
        start = text.index(secret)
        ref = 0.0
        for i, (a, b) in enumerate(enc["offset_mapping"]):
            if b > a and start <= a and b <= start + len(secret):
                ids = list(enc["input_ids"])
                ids[i] = tok.mask_token_id
                with torch.no_grad():
                    logits = model(input_ids=torch.tensor([ids])).logits[0, i]
                ref += torch.log_softmax(logits, -1)[enc["input_ids"][i]].item()
        assert value == pytest.approx(ref, abs=1e-4)


def test_a_memorised_secret_has_the_largest_exposure_and_controls_do_not(tiny):
    model, tok = tiny
    cans = make_canaries([1], per_repeat=1, controls=6, seed=3)
    planted = cans[0]
    text = planted.text
    enc = tok(text, return_offsets_mapping=True)
    start = text.index(planted.secret)
    secret_at = [i for i, (a, b) in enumerate(enc["offset_mapping"]) if b > a and a >= start]
    optimizer = torch.optim.AdamW(model.parameters(), lr=3e-3)
    gen = torch.Generator().manual_seed(0)
    model.train()
    for _ in range(150):  # train on the planted sentence only, one random secret digit masked per copy
        ids = torch.tensor([enc["input_ids"]] * 8)
        labels = torch.full_like(ids, -100)
        for row, k in enumerate(torch.randint(len(secret_at), (8,), generator=gen).tolist()):
            labels[row, secret_at[k]] = ids[row, secret_at[k]]
            ids[row, secret_at[k]] = tok.mask_token_id
        loss = model(input_ids=ids, labels=labels).loss
        optimizer.zero_grad()
        loss.backward()
        optimizer.step()
    n = 63

    def bits(c):
        scores = secret_scores(model, tok, c.tag, [c.secret] + candidates(c, n, seed=0))
        return exposure(scores[0], scores[1:])["exposure"]

    assert bits(planted) == pytest.approx(math.log2(n + 1))  # ranked first among 64
    controls = [bits(c) for c in cans[1:]]
    assert sum(controls) / len(controls) < math.log2(n + 1) - 2
