"""The masked-only loss equals the library's full-vocabulary MLM loss, and it can overfit one batch."""

from __future__ import annotations

import torch
from transformers import AutoModelForMaskedLM, AutoTokenizer

from adapt.training.masking import IGNORE_INDEX
from adapt.training.mlm_loss import MaskedOnlyMlm, MaskingPlan, sparse_tied_embedding_grad


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


def _grads(model, ids, mask, labels) -> dict[str, torch.Tensor]:
    model.zero_grad(set_to_none=True)
    MaskedOnlyMlm(model).eval()(ids, mask, labels).backward()
    return {n: p.grad for n, p in model.named_parameters() if p.grad is not None}


def test_sparse_lookup_gradient_of_the_tied_weight_equals_the_dense_one(tiny_encoder):
    # reference: transformers' own MLM loss with the lookup's gradient dense (nn.Embedding's default)
    tok = AutoTokenizer.from_pretrained(tiny_encoder)
    model = AutoModelForMaskedLM.from_pretrained(tiny_encoder).eval()
    ids, mask, labels = _batch(tok)
    model.zero_grad(set_to_none=True)
    model(input_ids=ids, attention_mask=mask, labels=labels).loss.backward()
    dense = {n: p.grad.clone() for n, p in model.named_parameters() if p.grad is not None}
    assert sparse_tied_embedding_grad(model)
    assert model.get_input_embeddings().sparse
    sparse = _grads(model, ids, mask, labels)
    assert sparse.keys() == dense.keys()
    for name, grad in sparse.items():
        assert grad.layout == torch.strided, name  # dense, as fused AdamW and gradient clipping need
        assert torch.allclose(grad, dense[name], atol=1e-6, rtol=1e-5), name
    # a batch with no masked position still gives the tied weight a dense (zero) gradient, never a sparse one
    none = _grads(model, ids, mask, torch.full_like(labels, IGNORE_INDEX))
    weight = model.get_input_embeddings().weight
    assert none["bert.embeddings.word_embeddings.weight"].layout == torch.strided
    assert float(weight.grad.abs().sum()) == 0.0


def test_an_untied_or_frozen_embedding_keeps_its_dense_gradient(tiny_encoder):
    model = AutoModelForMaskedLM.from_pretrained(tiny_encoder, tie_word_embeddings=False)
    assert model.get_input_embeddings().weight is not model.get_output_embeddings().weight
    assert not sparse_tied_embedding_grad(model) and not model.get_input_embeddings().sparse
    frozen = AutoModelForMaskedLM.from_pretrained(tiny_encoder)
    frozen.get_input_embeddings().weight.requires_grad_(False)
    assert not sparse_tied_embedding_grad(frozen) and not frozen.get_input_embeddings().sparse
