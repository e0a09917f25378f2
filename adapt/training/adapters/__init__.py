"""Training variants behind one registry: which weights continued pretraining may change.

Every variant implements the same contract, checked by one table-driven test: ``apply`` returns the model to train
(with ``requires_grad`` set), and ``export`` returns a plain transformers model that loads with
``AutoModelForMaskedLM.from_pretrained`` once saved.
"""

from __future__ import annotations

from typing import Callable

import torch
from transformers import PreTrainedModel

from adapt.config.pretrain import AdapterConfig
from adapt.training.encoder import head_parameter_names


class Adapter:
    name = ""

    def apply(self, model: PreTrainedModel, cfg: AdapterConfig) -> torch.nn.Module:
        raise NotImplementedError

    def export(self, model: torch.nn.Module) -> PreTrainedModel:
        return model  # plain models need nothing


ADAPTERS: dict[str, type[Adapter]] = {}


def register(cls: type[Adapter]) -> type[Adapter]:
    ADAPTERS[cls.name] = cls
    return cls


def _train_only(model: PreTrainedModel, keep: Callable[[str], bool]) -> PreTrainedModel:
    for name, param in model.named_parameters():
        param.requires_grad_(keep(name))
    return model


@register
class Full(Adapter):
    """Every weight trains."""

    name = "full"

    def apply(self, model, cfg):
        return _train_only(model, lambda n: True)


@register
class Embeddings(Adapter):
    """Only the embeddings and the MLM head train (the decoder is tied to the word embeddings)."""

    name = "embeddings"

    def apply(self, model, cfg):
        head = set(head_parameter_names(model))
        return _train_only(model, lambda n: n in head or ".embeddings." in n)


@register
class TopLayers(Adapter):
    """The highest ``num_top_layers`` encoder layers and the MLM head train."""

    name = "top_layers"

    def apply(self, model, cfg):
        total = model.config.num_hidden_layers
        if cfg.num_top_layers > total:
            from adapt.common.errors import ConfigError

            raise ConfigError(f"adapter.num_top_layers={cfg.num_top_layers} exceeds the encoder's {total} layers; "
                              f"try adapter.num_top_layers={max(1, total // 3)}")
        top = {f".layer.{i}." for i in range(total - cfg.num_top_layers, total)}
        head = set(head_parameter_names(model))
        return _train_only(model, lambda n: n in head or any(t in n for t in top))


@register
class Lora(Adapter):
    """Low-rank adapters on the chosen projections (Hu et al. 2021); the head's transform trains as well.

    ``modules_to_save=["transform"]`` keeps the decoder tied to the embeddings (a trainable copy of the whole
    decoder would add vocab × hidden parameters).
    """

    name = "lora"

    def apply(self, model, cfg):
        from peft import LoraConfig, get_peft_model

        lora = LoraConfig(r=cfg.r, lora_alpha=cfg.alpha, lora_dropout=cfg.dropout,
                          target_modules=list(cfg.target_modules), modules_to_save=["transform"],
                          exclude_modules=r".*predictions.*")
        return get_peft_model(model, lora)

    def export(self, model):
        return model.merge_and_unload()


def build_adapter(kind: str) -> Adapter:
    return ADAPTERS[kind]()


def count_trainable(model: torch.nn.Module) -> tuple[int, int]:
    """(trainable, total) parameter counts; tied weights counted once."""
    seen: set[int] = set()
    trainable = total = 0
    for p in model.parameters():
        if id(p) in seen:
            continue
        seen.add(id(p))
        total += p.numel()
        trainable += p.numel() if p.requires_grad else 0
    return trainable, total
