"""The last encoder layer at masked positions only gives transformers' own MLM loss and gradients.

Reference: ``BertForMaskedLM`` / ``RobertaForMaskedLM`` forward with ``labels`` (transformers' cross-entropy over
every position, ignoring -100), eval mode so that dropout draws nothing."""

from __future__ import annotations

import pytest
import torch
from transformers import AutoModelForMaskedLM, AutoTokenizer, RobertaConfig, RobertaForMaskedLM

from adapt.training import final_layer
from adapt.training.encoder import encoder_body
from adapt.training.mlm_loss import MaskedOnlyMlm, MaskingPlan


def _batch(tokenizer, rate=0.3, seed=0):
    texts = ["the tenant paid the rent to the landlord in months", "the nurse gave the patient a dose",
             "a short one"]  # padding in rows two and three
    enc = tokenizer(texts, padding=True, return_tensors="pt")
    plan = MaskingPlan(tokenizer, rate, 0.8, 0.1)
    masked, labels = plan.apply(enc["input_ids"], enc["attention_mask"], torch.Generator().manual_seed(seed))
    return masked, enc["attention_mask"], labels


def _loss_and_grads(loss_fn, model):
    model.zero_grad(set_to_none=True)
    loss = loss_fn()
    loss.backward()
    return loss.detach(), {n: p.grad.clone() for n, p in model.named_parameters() if p.grad is not None}


def _assert_same_as_library(model, ids, mask, labels, monkeypatch):
    model.eval()
    calls = []
    original = final_layer._last_layer_at
    monkeypatch.setattr(final_layer, "_last_layer_at", lambda *a: calls.append(1) or original(*a))
    ours, ours_grads = _loss_and_grads(lambda: MaskedOnlyMlm(model)(ids, mask, labels), model)
    assert calls, "the masked-position path did not run"
    ref, ref_grads = _loss_and_grads(
        lambda: model(input_ids=ids, attention_mask=mask, labels=labels).loss, model)
    assert torch.allclose(ours, ref, atol=1e-6)
    assert ours_grads.keys() == ref_grads.keys()
    for name, grad in ours_grads.items():
        assert torch.allclose(grad, ref_grads[name], atol=1e-6, rtol=1e-4), name


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_bert_loss_and_every_gradient_equal_the_full_forward(tiny_encoder, seed, monkeypatch):
    tok = AutoTokenizer.from_pretrained(tiny_encoder)
    model = AutoModelForMaskedLM.from_pretrained(tiny_encoder)
    assert final_layer.supports_masked_final_layer(encoder_body(model))
    _assert_same_as_library(model, *_batch(tok, seed=seed), monkeypatch)


def test_roberta_and_eager_attention_equal_the_full_forward(tiny_encoder, monkeypatch):
    tok = AutoTokenizer.from_pretrained(tiny_encoder)
    config = RobertaConfig(vocab_size=len(tok), hidden_size=32, num_hidden_layers=2, num_attention_heads=2,
                           intermediate_size=64, max_position_embeddings=130, pad_token_id=tok.pad_token_id)
    torch.manual_seed(0)
    model = RobertaForMaskedLM(config)
    _assert_same_as_library(model, *_batch(tok), monkeypatch)
    bert = AutoModelForMaskedLM.from_pretrained(tiny_encoder, attn_implementation="eager")
    _assert_same_as_library(bert, *_batch(tok), monkeypatch)


def test_lora_layers_in_the_last_layer_are_used(tiny_encoder, monkeypatch):
    from peft import LoraConfig, get_peft_model

    tok = AutoTokenizer.from_pretrained(tiny_encoder)
    base = AutoModelForMaskedLM.from_pretrained(tiny_encoder)
    model = get_peft_model(base, LoraConfig(r=4, target_modules=["query", "value"], init_lora_weights=False))
    _assert_same_as_library(model, *_batch(tok), monkeypatch)


def test_other_layer_shapes_fall_back_to_the_full_forward(tiny_encoder):
    model = AutoModelForMaskedLM.from_pretrained(tiny_encoder)
    body = encoder_body(model)
    body.config.chunk_size_feed_forward = 4
    body.encoder.layer[-1].chunk_size_feed_forward = 4
    assert not final_layer.supports_masked_final_layer(body)
    decoder = AutoModelForMaskedLM.from_pretrained(tiny_encoder)
    encoder_body(decoder).config.is_decoder = True
    assert not final_layer.supports_masked_final_layer(encoder_body(decoder))
