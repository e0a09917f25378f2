"""One contract for every registered training variant (trainable count, forward shape, export round trip)."""

from __future__ import annotations

import pytest
import torch
from transformers import AutoModelForMaskedLM

from adapt.training.adapters import ADAPTERS, build_adapter, count_trainable
from adapt.config.pretrain import AdapterConfig
from adapt.training.encoder import head_parameter_names


def _expected_trainable(model, kind: str, cfg: AdapterConfig) -> int:
    h = model.config.hidden_size
    layers = model.config.num_hidden_layers
    params = dict(model.named_parameters())
    head = sum(params[n].numel() for n in head_parameter_names(model))
    if kind == "full":
        return count_trainable(model)[1]
    if kind == "lora":
        # Hu et al. 2021 §4: r·(d_in + d_out) per adapted matrix; plus the head transform (dense + LayerNorm)
        transform = h * h + h + 2 * h
        return layers * len(cfg.target_modules) * cfg.r * (h + h) + transform
    if kind == "embeddings":
        return head + sum(p.numel() for n, p in params.items() if ".embeddings." in n)
    if kind == "top_layers":
        top = {f".layer.{i}." for i in range(layers - cfg.num_top_layers, layers)}
        return head + sum(p.numel() for n, p in params.items() if any(t in n for t in top))
    raise AssertionError(f"add the expected count for new adapter {kind!r} to this test")


@pytest.mark.parametrize("kind", sorted(ADAPTERS))
def test_adapter_contract(tmp_path, tiny_encoder, kind):
    cfg = AdapterConfig(kind=kind, r=4, num_top_layers=1)
    model = AutoModelForMaskedLM.from_pretrained(tiny_encoder)
    expected = _expected_trainable(model, kind, cfg)
    adapter = build_adapter(kind)
    wrapped = adapter.apply(model, cfg)
    assert count_trainable(wrapped)[0] == expected
    ids = torch.tensor([[2, 40, 41, 42, 3]])
    logits = wrapped(input_ids=ids, attention_mask=torch.ones_like(ids)).logits
    assert logits.shape == (1, 5, model.config.vocab_size)
    with torch.no_grad():  # nudge the trainable weights so the export must carry them
        for p in wrapped.parameters():
            if p.requires_grad:
                p.add_(0.01)
        wrapped.eval()
        before = wrapped(input_ids=ids).logits
    plain = adapter.export(wrapped)
    plain.save_pretrained(tmp_path / "out")
    reloaded = AutoModelForMaskedLM.from_pretrained(tmp_path / "out").eval()
    with torch.no_grad():
        after = reloaded(input_ids=ids).logits
    assert torch.allclose(before, after, atol=1e-5)


def test_config_names_every_registered_adapter():
    # the config validates adapter.kind without importing torch, so it keeps its own list of names
    from adapt.config.pretrain import ADAPTER_KINDS

    assert sorted(ADAPTER_KINDS) == sorted(ADAPTERS)
