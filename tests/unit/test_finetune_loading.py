"""Fine-tuning loads its encoder through the one encoder loader (remote code off unless asked for) and builds
its optimizer with the one parameter-group rule."""

from __future__ import annotations

import pytest
import torch
import transformers

from adapt.config.compare import CompareJob, FinetuneConfig
from adapt.evaluation import finetune as ft
from adapt.training.optimizer import build_adamw


@pytest.fixture
def remote_code_flags(monkeypatch) -> list[tuple[str, object]]:
    """(class, trust_remote_code passed) for every from_pretrained call of the Auto classes."""
    calls: list[tuple[str, object]] = []
    for cls in (transformers.AutoConfig, transformers.AutoTokenizer, transformers.AutoModel):
        real = cls.from_pretrained

        def spy(*args, _real=real, _name=cls.__name__, **kwargs):
            calls.append((_name, kwargs.get("trust_remote_code", "not given")))
            return _real(*args, **kwargs)

        monkeypatch.setattr(cls, "from_pretrained", spy)
    return calls


def test_remote_code_is_off_unless_turned_on(tiny_encoder, remote_code_flags):
    ft.check_checkpoint(str(tiny_encoder), "base")
    ft.load_classifier(str(tiny_encoder), 2, 0.1, 0, "base")
    assert {name for name, _ in remote_code_flags} == {"AutoConfig", "AutoTokenizer", "AutoModel"}
    assert {flag for _, flag in remote_code_flags} == {False}
    remote_code_flags.clear()
    ft.check_checkpoint(str(tiny_encoder), "base", trust_remote_code=True)
    ft.load_classifier(str(tiny_encoder), 2, 0.1, 0, "base", trust_remote_code=True)
    assert remote_code_flags and {flag for _, flag in remote_code_flags} == {True}


def test_compare_passes_its_remote_code_setting_to_every_arm(monkeypatch):
    from adapt.stages import compare

    assert CompareJob().trust_remote_code is False
    seen = []
    monkeypatch.setattr(ft, "check_checkpoint", lambda path, arm, trust_remote_code: seen.append(trust_remote_code))

    def fake_finetune(*args, trust_remote_code, **kwargs):  # noqa: ANN002, ANN003
        seen.append(trust_remote_code)
        return ft.ArmResult(0, 1.0, 1.0, 1.0, 1.0, [0], [0])

    monkeypatch.setattr(ft, "finetune", fake_finetune)
    cfg = CompareJob(arms={"base": "b", "adapted": "a"}, seeds=[0], tfidf_baseline=False, trust_remote_code=True)
    compare._check_arms(cfg, {"base": "b", "adapted": "a"})
    compare._run_arms(cfg, None, {"base": "b", "adapted": "a"}, precision="fp32")
    assert seen == [True] * 4  # two checks, two fine-tuning runs


def test_no_weight_decay_on_biases_and_layer_norms(tiny_encoder):
    model = transformers.AutoModel.from_pretrained(tiny_encoder)
    model.embeddings.position_embeddings.weight.requires_grad_(False)  # frozen: in no group
    opt = build_adamw(model, learning_rate=1e-3, weight_decay=0.01, device=torch.device("cpu"))
    names = {id(p): n for n, p in model.named_parameters()}
    decay, no_decay = ({names[id(p)] for p in g["params"]} for g in opt.param_groups)
    assert [g["weight_decay"] for g in opt.param_groups] == [0.01, 0.0]
    # BERT's own optimizer excluded "LayerNorm", "layer_norm" and "bias" from weight decay (from memory:
    # google-research/bert optimization.py, exclude_from_weight_decay); the ndim < 2 rule picks the same names
    trainable = {n for n, p in model.named_parameters() if p.requires_grad}
    assert no_decay == {n for n in trainable if "bias" in n or "LayerNorm" in n}
    assert decay == trainable - no_decay and "embeddings.position_embeddings.weight" not in decay
    assert opt.defaults["lr"] == 1e-3 and opt.defaults["fused"] is True


def test_finetune_uses_the_shared_optimizer_rule(tiny_encoder):
    model, _ = ft.load_classifier(str(tiny_encoder), 2, 0.1, 0, "base")
    cfg = FinetuneConfig()
    opt, _ = ft._optimizer(model, cfg, total_steps=10, device=torch.device("cpu"))
    shared = build_adamw(model, cfg.learning_rate, cfg.weight_decay, torch.device("cpu"))
    assert [[id(p) for p in g["params"]] for g in opt.param_groups] == \
        [[id(p) for p in g["params"]] for g in shared.param_groups]
    assert [g["weight_decay"] for g in opt.param_groups] == [cfg.weight_decay, 0.0]
