"""encoder.attention_dropout: the attention-probability dropout of pretraining only; every exported folder keeps
the starting encoder's own value."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
import torch

from adapt.common.errors import ConfigError
from adapt.config import compose_job
from adapt.config.pretrain import PretrainEncoderConfig
from adapt.stages import pretrain
from adapt.training.encoder import load_mlm
from tests.e2e.test_pretrain import tiny_cfg

ATTR = "attention_probs_dropout_prob"  # BertConfig's name for it (transformers' BertConfig docstring)


def _original(encoder: Path) -> float:
    return json.loads((encoder / "config.json").read_text())[ATTR]


def _run_recorded(monkeypatch, cfg) -> tuple[dict, torch.nn.Module, list[float]]:
    """Run the job; return its result, the model it trained and the dropout_p of every SDPA call in training."""
    models, train_dropouts = [], []
    real_load, real_sdpa = pretrain.load_mlm, torch.nn.functional.scaled_dot_product_attention

    def load(*args, **kwargs):
        model, report = real_load(*args, **kwargs)
        models.append(model)
        return model, report

    def sdpa(*args, dropout_p=0.0, **kwargs):
        if torch.is_grad_enabled():  # training steps (the warm-up encodes and the evaluations run without grad)
            train_dropouts.append(dropout_p)
        return real_sdpa(*args, dropout_p=dropout_p, **kwargs)

    monkeypatch.setattr(pretrain, "load_mlm", load)
    monkeypatch.setattr(torch.nn.functional, "scaled_dot_product_attention", sdpa)
    result = pretrain.run(cfg)
    return result, models[0], train_dropouts


def _attention_dropouts(model: torch.nn.Module) -> dict[str, float]:
    """p of every dropout module by name, split into BERT's attention-probability ones and the rest."""
    found = {n: m.p for n, m in model.named_modules() if isinstance(m, torch.nn.Dropout)}
    return ({n: p for n, p in found.items() if n.endswith("attention.self.dropout")},
            {n: p for n, p in found.items() if not n.endswith("attention.self.dropout")})


def test_zero_trains_without_attention_dropout_and_exports_the_original(tmp_path, tiny_encoder, monkeypatch):
    original = _original(tiny_encoder)
    assert original > 0  # the fixture's BERT has attention dropout, else this test shows nothing
    cfg = tiny_cfg(tmp_path, tiny_encoder, "run", "encoder.attention_dropout=0", "checkpoint.keep_best=true")
    result, model, train_dropouts = _run_recorded(monkeypatch, cfg)
    attention, other = _attention_dropouts(model)
    assert len(attention) == model.config.num_hidden_layers and set(attention.values()) == {0.0}
    assert set(other.values()) == {model.config.hidden_dropout_prob}  # hidden-state dropouts untouched
    assert train_dropouts and set(train_dropouts) == {0.0}
    assert getattr(model.config, ATTR) == 0.0  # training value back after every export
    out = tmp_path / "run"
    folders = [out / "base", out / "final", out / "best"] + sorted((out / "checkpoints").glob("step-*"))
    assert len(folders) > 3
    for folder in folders:
        assert json.loads((folder / "config.json").read_text())[ATTR] == original, folder.name
    assert result["attention_dropout"] == {"training": 0.0, "exported": original}
    card = (out / "final" / "README.md").read_text()
    assert f"attention-probability dropout: 0.0 in training (encoder.attention_dropout); config.json keeps " \
           f"the starting encoder's {original}" in card


def test_null_keeps_the_checkpoint_value(tmp_path, tiny_encoder, monkeypatch):
    original = _original(tiny_encoder)
    result, model, train_dropouts = _run_recorded(monkeypatch, tiny_cfg(tmp_path, tiny_encoder, "run"))
    attention, _ = _attention_dropouts(model)
    assert attention and set(attention.values()) == {original}
    assert train_dropouts and set(train_dropouts) == {original}
    assert json.loads((tmp_path / "run" / "final" / "config.json").read_text())[ATTR] == original
    assert result["attention_dropout"] == {"training": original, "exported": original}
    assert f"attention-probability dropout: {original} (the starting encoder's own)" in \
        (tmp_path / "run" / "final" / "README.md").read_text()


def test_a_changed_value_is_refused_on_resume(tmp_path, tiny_encoder):
    pretrain.run(tiny_cfg(tmp_path, tiny_encoder, "run", "encoder.attention_dropout=0", "schedule.stop_after_steps=2"))
    with pytest.raises(ConfigError, match=r"encoder\.attention_dropout: checkpoint 0\.0, now None"):
        pretrain.run(tiny_cfg(tmp_path, tiny_encoder, "run"))


@pytest.mark.parametrize("value", ["-0.1", "1", "1.5"])
def test_values_outside_the_range_are_one_line_errors(value):
    with pytest.raises(ConfigError) as err:
        compose_job("pretrain", ["corpus_dir=x", f"encoder.attention_dropout={value}"])
    message = str(err.value)
    assert message.startswith(f"encoder.attention_dropout={float(value)} is outside [0, 1)") and "\n" not in message
    assert "encoder.attention_dropout=0" in message  # the fix


@pytest.mark.parametrize("random_init", [False, True])
def test_an_architecture_without_attention_dropout_is_refused(tmp_path, random_init):
    from transformers import FNetConfig  # FNet mixes tokens with Fourier transforms, no attention (Lee-Thorp et al. 2021, from memory)

    FNetConfig(vocab_size=50, hidden_size=16, num_hidden_layers=1, intermediate_size=32).save_pretrained(tmp_path)
    cfg = PretrainEncoderConfig(name_or_path=str(tmp_path), random_init=random_init)
    with pytest.raises(ConfigError) as err:
        load_mlm(cfg, attention_dropout=0.0)
    message = str(err.value)
    assert message.startswith("encoder.attention_dropout=0.0: the config of") and "(fnet)" in message
    assert message.endswith("set encoder.attention_dropout=null") and "\n" not in message
