"""The MLM-head warm-up on cached encoder states, on a tiny random BERT whose saved file has no head."""

from __future__ import annotations

import contextlib

import pytest
import torch
import torch.nn.functional as F
from transformers import AutoTokenizer, BertForMaskedLM

import adapt.training.head_warmup as hw
from adapt.training.masking import IGNORE_INDEX
from adapt.training.mlm_loss import FixedMaskEval, MaskedOnlyMlm, MaskingPlan
from tests.conftest import build_tiny_encoder
from tests.unit.test_word_masking import _packed

CPU = torch.device("cpu")
SETTINGS = dict(sample_seqs=40, heldout_share=0.2, max_epochs=6, learning_rate=1e-2, batch_size=32,
                min_improvement=0.0, seed=0, device=CPU, autocast=contextlib.nullcontext, progress=False,
                encode_batch_size=8)


@pytest.fixture
def setup(tmp_path):
    folder = build_tiny_encoder(tmp_path / "tiny", with_head=False)
    tokenizer = AutoTokenizer.from_pretrained(folder)
    torch.manual_seed(0)  # the missing head weights' random init
    model = BertForMaskedLM.from_pretrained(folder)
    plan = MaskingPlan(tokenizer, 0.15, 0.8, 0.1)
    return model, tokenizer, _packed(tokenizer, n_docs=200), plan


def test_cached_states_give_the_full_models_logits(setup):
    model, tokenizer, seqs, plan = setup
    rows, _ = hw.sample_rows(len(seqs), 12, 0.2, seed=3)
    states = hw.cache_masked_states(model, seqs, plan, rows, seed=3, batch_size=5, device=CPU,
                                    autocast=contextlib.nullcontext)
    # the same seeded mask, through transformers' own BertForMaskedLM forward (eval mode: no dropout)
    g = torch.Generator().manual_seed(hw.step_seed(3, hw.SALT, 1))
    _, mask, masked, labels = plan.apply_rows(seqs, rows, g)
    model.eval()
    with torch.no_grad():
        full = model(input_ids=masked, attention_mask=mask).logits[labels != IGNORE_INDEX]  # (M, V)
        cached = hw.mlm_head(model)(states.hidden)
    assert len(states.labels) == int((labels != IGNORE_INDEX).sum()) > 0
    assert torch.equal(states.labels, labels[labels != IGNORE_INDEX])
    torch.testing.assert_close(cached, full, atol=1e-5, rtol=1e-5)
    loss = hw.heldout_loss(hw.mlm_head(model), states, 7, CPU, contextlib.nullcontext)
    assert loss == pytest.approx(float(F.cross_entropy(full, states.labels)), abs=1e-5)


@pytest.mark.parametrize("losses, stops", [
    ([10.0, 9.99], False),  # one flat window is not enough
    ([10.0, 9.99, 5.0], False),  # a flat window followed by a real improvement
    ([10.0, 5.0, 4.99], False),
    ([10.0, 9.99, 9.98], True),
    ([10.0, 9.99, 10.5], True),  # worse counts as flat
])
def test_flat_twice_needs_two_flat_windows_in_a_row(losses, stops):
    assert hw.flat_twice(losses, 0.01) is stops
    assert hw.flat_twice(losses, 0.0) is False  # 0 turns the criterion off


def test_the_held_out_criterion_stops_on_the_second_flat_epoch(setup, monkeypatch):
    model, tokenizer, seqs, plan = setup
    scripted = iter([10.0, 9.99, 5.0, 4.99, 4.98, 1.0, 0.5])  # before, then after each epoch
    monkeypatch.setattr(hw, "heldout_loss", lambda *args: next(scripted))
    result = hw.warm_up_head(model, seqs, plan, **{**SETTINGS, "max_epochs": 6, "min_improvement": 0.01})
    assert result.converged and result.heldout_losses == [10.0, 9.99, 5.0, 4.99, 4.98]
    assert len(result.train_losses) == 4 and result.best_loss == 4.98


def test_without_the_criterion_it_runs_every_epoch(setup):
    model, tokenizer, seqs, plan = setup
    result = hw.warm_up_head(model, seqs, plan, **{**SETTINGS, "max_epochs": 3})
    assert not result.converged and len(result.heldout_losses) == 4 and result.steps > 3


def test_the_heldout_loss_falls_and_only_the_head_changes(setup):
    model, tokenizer, seqs, plan = setup
    body_before = {k: v.clone() for k, v in model.bert.state_dict().items()}
    head_before = {n: p.detach().clone() for n, p in model.named_parameters() if n.startswith("cls.")}
    # judged by the full model on sequences and a mask the warm-up never saw
    unseen = FixedMaskEval(_packed(tokenizer, n_docs=60, seed=9), plan, 1, 16, 8)
    before = unseen.loss(MaskedOnlyMlm(model), CPU, contextlib.nullcontext)
    result = hw.warm_up_head(model, seqs, plan, **SETTINGS)
    after = unseen.loss(MaskedOnlyMlm(model), CPU, contextlib.nullcontext)
    assert result.best_loss < result.heldout_losses[0] and after < before
    for key, value in model.bert.state_dict().items():
        assert torch.equal(value, body_before[key]), f"the warm-up changed encoder weight {key}"
    assert model.cls.predictions.decoder.weight is model.bert.embeddings.word_embeddings.weight
    changed = [n for n, p in model.named_parameters() if n in head_before and not torch.equal(p, head_before[n])]
    assert "cls.predictions.transform.dense.weight" in changed and "cls.predictions.bias" in changed
    assert all(p.requires_grad for p in model.parameters()), "requires_grad must be given back"


def test_same_seed_same_head_and_a_stop_signal_ends_it(setup, tmp_path):
    model, tokenizer, seqs, plan = setup
    first = hw.warm_up_head(model, seqs, plan, **SETTINGS)
    head = {n: p.detach().clone() for n, p in model.named_parameters() if n.startswith("cls.")}
    torch.manual_seed(0)
    again = BertForMaskedLM.from_pretrained(tmp_path / "tiny")
    second = hw.warm_up_head(again, seqs, plan, **SETTINGS)
    assert first.heldout_losses == second.heldout_losses and first.train_losses == second.train_losses
    for name, param in again.named_parameters():
        if name in head:
            assert torch.equal(param, head[name]), f"{name} differs between two runs with one seed"
    assert hw.warm_up_head(again, seqs, plan, **SETTINGS, should_stop=lambda: True) is None


def test_prior_bias_is_the_log_frequency_of_the_masked_labels(setup):
    from scipy.special import log_softmax

    model, tokenizer, seqs, plan = setup
    labels = torch.tensor([3, 3, 3, 7, 7, 11])
    bias = hw.output_bias(model)
    hw.init_bias_from_labels(bias, labels, smoothing=0.5)
    counts = torch.bincount(labels, minlength=bias.numel()).double() + 0.5
    # softmax of the bias alone is the smoothed unigram distribution of the labels (add-k smoothing, common
    # practice); scipy's log_softmax is the reference normalisation
    torch.testing.assert_close(torch.from_numpy(log_softmax(bias.detach().double().numpy())),
                               (counts / counts.sum()).log(), atol=1e-5, rtol=0)
    assert model.cls.predictions.decoder.bias is bias  # the tied name sees the same values


def test_prior_bias_starts_lower_and_only_when_the_bias_was_missing(setup):
    model, tokenizer, seqs, plan = setup
    assert hw.bias_was_missing(model, ["cls.predictions.bias", "cls.predictions.transform.dense.weight"])
    assert hw.bias_was_missing(model, ["cls.predictions.decoder.bias"])  # the tied name
    assert not hw.bias_was_missing(model, ["cls.predictions.transform.dense.weight"])
    start = {n: p.detach().clone() for n, p in model.named_parameters()}
    plain = hw.warm_up_head(model, seqs, plan, **{**SETTINGS, "max_epochs": 1})
    with torch.no_grad():
        for n, p in model.named_parameters():
            p.copy_(start[n])
    prior = hw.warm_up_head(model, seqs, plan, **{**SETTINGS, "max_epochs": 1}, missing=["cls.predictions.bias"])
    # the same cached states and held-out positions: the unigram start is far below the uniform one, log(V)
    assert prior.heldout_losses[0] < plain.heldout_losses[0] - 0.5


def test_identity_start_of_a_missing_transform_is_the_logit_lens(setup):
    model, tokenizer, seqs, plan = setup
    dense = model.cls.predictions.transform.dense
    assert hw.square_transform(model) is dense
    assert hw.transform_was_missing(model, ["cls.predictions.transform.dense.weight"])
    assert not hw.transform_was_missing(model, ["cls.predictions.bias", "cls.predictions.decoder.bias"])
    hidden = torch.randn(50, dense.in_features) * 0.4
    hw.init_transform_as_identity(dense, hidden)
    # a scaled identity with no bias: pre-activations are the states times one factor, at IDENTITY_RMS
    factor = float(dense.weight.detach()[0, 0])
    torch.testing.assert_close(dense.weight, torch.eye(dense.in_features) * factor)
    assert float(dense.bias.abs().max()) == 0.0
    assert float(dense(hidden).pow(2).mean().sqrt()) == pytest.approx(hw.IDENTITY_RMS, rel=1e-5)
    # the head then scores tokens by LayerNorm(GELU(factor * h)) . embedding + bias, written out by hand from
    # BERT's prediction head (Devlin et al. 2019, appendix A.2: dense + GELU + layer norm, decoder tied to the
    # input embeddings)
    ln = model.cls.predictions.transform.LayerNorm
    z = F.gelu(factor * hidden)
    z = (z - z.mean(-1, keepdim=True)) / torch.sqrt(z.var(-1, unbiased=False, keepdim=True) + ln.eps)
    by_hand = (z * ln.weight + ln.bias) @ model.get_input_embeddings().weight.T + hw.output_bias(model)
    with torch.no_grad():
        torch.testing.assert_close(hw.mlm_head(model)(hidden), by_hand, atol=1e-4, rtol=1e-4)


def test_warm_up_applies_the_identity_start_only_to_a_missing_transform(setup):
    model, tokenizer, seqs, plan = setup
    dense = model.cls.predictions.transform.dense
    kept = dense.weight.detach().clone()
    hw.warm_up_head(model, seqs, plan, **{**SETTINGS, "max_epochs": 0})  # no epochs: only the start is applied
    assert torch.equal(dense.weight, kept)  # present in the checkpoint: left as it was
    hw.warm_up_head(model, seqs, plan, **{**SETTINGS, "max_epochs": 0},
                    missing=["cls.predictions.transform.dense.weight"])
    assert torch.count_nonzero(dense.weight - torch.diag(torch.diagonal(dense.weight))) == 0


def test_square_transform_of_a_roberta_like_head(tmp_path):
    from transformers import RobertaConfig, RobertaForMaskedLM

    model = RobertaForMaskedLM(RobertaConfig(vocab_size=99, hidden_size=16, num_hidden_layers=1,
                                             num_attention_heads=2, intermediate_size=32))
    assert hw.square_transform(model) is model.lm_head.dense
    assert hw.transform_was_missing(model, ["lm_head.dense.weight"])
