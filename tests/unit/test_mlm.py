"""The masked-only loss equals the library's full-vocabulary MLM loss, and it can overfit one batch."""

from __future__ import annotations

import torch
from transformers import AutoModelForMaskedLM, AutoTokenizer

from adapt.training.mlm_loss import MaskedOnlyMlm, MaskingPlan


def _batch(tokenizer, seed=0):
    texts = ["the tenant paid the rent to the landlord in months", "the nurse gave the patient a dose on the ward"]
    enc = tokenizer(texts, padding=True, return_tensors="pt")
    plan = MaskingPlan(tokenizer, 0.3, 0.8, 0.1)
    masked, labels = plan.apply(enc["input_ids"], enc["attention_mask"], torch.Generator().manual_seed(seed))
    return masked, enc["attention_mask"], labels


def test_masked_only_loss_equals_full_forward_loss(tiny_encoder):
    tok = AutoTokenizer.from_pretrained(tiny_encoder)
    model = AutoModelForMaskedLM.from_pretrained(tiny_encoder).eval()
    ids, mask, labels = _batch(tok)
    with torch.no_grad():
        ours = MaskedOnlyMlm(model)(ids, mask, labels)
        reference = model(input_ids=ids, attention_mask=mask, labels=labels).loss  # transformers' own MLM loss
    assert torch.allclose(ours, reference, atol=1e-6)


def test_loss_falls_when_overfitting_one_batch(tiny_encoder):
    tok = AutoTokenizer.from_pretrained(tiny_encoder)
    model = AutoModelForMaskedLM.from_pretrained(tiny_encoder)
    model.config.hidden_dropout_prob = 0.0
    ids, mask, labels = _batch(tok)
    module = MaskedOnlyMlm(model).train()
    opt = torch.optim.AdamW(model.parameters(), lr=3e-3)
    torch.manual_seed(0)
    losses = []
    for _ in range(40):
        loss = module(ids, mask, labels)
        loss.backward()
        opt.step()
        opt.zero_grad()
        losses.append(float(loss.detach()))
    assert losses[-1] < 0.3 * losses[0]
