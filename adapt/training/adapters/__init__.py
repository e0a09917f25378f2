"""Training variants behind one registry: which weights continued pretraining may change.

Every variant implements the same contract, checked by one table-driven test: ``check`` refuses settings the
model cannot take before any work starts, ``apply`` returns the model to train (with ``requires_grad`` set),
``export`` returns a plain transformers model that loads with ``AutoModelForMaskedLM.from_pretrained`` once saved,
and ``save_weights``/``load_weights`` write a checkpoint's model files and restore them bit for bit.
"""

from __future__ import annotations

from pathlib import Path
from typing import Callable

import torch
from safetensors.torch import load_model
from transformers import PreTrainedModel

from adapt.common.errors import ConfigError
from adapt.config.pretrain import AdapterConfig
from adapt.training.encoder import head_parameter_names
from adapt.training.export import WEIGHTS, write_model_folder

ADAPTER_FOLDER = "adapter"  # a LoRA checkpoint's adapters in peft's format, beside the merged model


def load_exact(model: torch.nn.Module, weights: Path) -> None:
    """Copy every weight of a safetensors file into ``model`` (tied weights count once); all must fit."""
    missing, unexpected = load_model(model, str(weights), strict=False)
    if missing or unexpected:
        raise RuntimeError(f"{weights} does not fit the model (missing {sorted(missing)[:3]}, unexpected "
                           f"{sorted(unexpected)[:3]}) although the run's fingerprint matched")


class Adapter:
    name = ""
    # True when resuming needs the run's base/ (the starting model) beside the checkpoint
    needs_base = False

    def check(self, model: PreTrainedModel, cfg: AdapterConfig) -> None:
        """Raise ``ConfigError`` for settings this model cannot take (called before the corpus is read)."""

    def apply(self, model: PreTrainedModel, cfg: AdapterConfig) -> torch.nn.Module:
        raise NotImplementedError

    def export(self, model: torch.nn.Module) -> PreTrainedModel:
        return model  # plain models need nothing

    def save_weights(self, model: torch.nn.Module, tokenizer, folder: Path, base_dir: Path) -> None:
        """A checkpoint's model files: a plain model folder holding every weight, which is also the resume state."""
        write_model_folder(model, tokenizer, folder)

    def load_base(self, model: PreTrainedModel, base_dir: Path) -> None:
        """Before ``apply`` on resume: restore the frozen starting weights the checkpoint does not hold."""

    def load_weights(self, model: torch.nn.Module, folder: Path) -> None:
        """After ``apply`` on resume: restore what ``save_weights`` wrote, exactly."""
        load_exact(model, folder / WEIGHTS)


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

    def check(self, model, cfg):
        total = model.config.num_hidden_layers
        if cfg.num_top_layers > total:
            raise ConfigError(f"adapter.num_top_layers={cfg.num_top_layers} exceeds the encoder's {total} layers; "
                              f"try adapter.num_top_layers={max(1, total // 3)}")

    def apply(self, model, cfg):
        self.check(model, cfg)
        total = model.config.num_hidden_layers
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
    needs_base = True  # the checkpoint holds the adapters; the frozen weights are the run's base/

    def check(self, model, cfg):
        # peft matches a list of names against the end of each module's dotted name
        matrices = {n: m.weight.shape for n, m in model.named_modules()
                    if "predictions" not in n and getattr(m, "weight", None) is not None and m.weight.ndim == 2}
        hits = {t: [n for n in matrices if n == t or n.endswith("." + t)] for t in cfg.target_modules}
        unknown = [t for t, names in hits.items() if not names]
        if unknown:
            choices = sorted({n.rsplit(".", 1)[-1] for n in matrices})
            raise ConfigError(f"adapter.target_modules={list(cfg.target_modules)}: {', '.join(unknown)} match no "
                              f"weight matrix of {model.config.model_type}; choose from {', '.join(choices)}")
        name, shape = min(((n, matrices[n]) for names in hits.values() for n in names), key=lambda ns: min(ns[1]))
        if cfg.r > min(shape):
            raise ConfigError(f"adapter.r={cfg.r} exceeds {min(shape)}, the smaller side of the adapted matrix {name} "
                              f"({shape[0]} x {shape[1]}): a larger rank adds parameters but no capacity; try "
                              f"adapter.r={min(8, min(shape))}")

    def apply(self, model, cfg):
        from peft import LoraConfig, get_peft_model

        self.check(model, cfg)
        lora = LoraConfig(r=cfg.r, lora_alpha=cfg.alpha, lora_dropout=cfg.dropout,
                          target_modules=list(cfg.target_modules), modules_to_save=["transform"],
                          exclude_modules=r".*predictions.*")
        return get_peft_model(model, lora)

    def export(self, model):
        return model.merge_and_unload()

    def save_weights(self, model, tokenizer, folder, base_dir):
        """The merged model (a plain folder for score and compare) and the adapters in peft's format, whose
        ``base_model_name_or_path`` is the run's base/. The merge runs on a copy: the live model stays unmerged
        (merging and unmerging again is not exact), at the cost of one more copy of the weights for a moment."""
        import copy

        from peft import get_peft_model_state_dict
        from safetensors.torch import save_file

        write_model_folder(copy.deepcopy(model).merge_and_unload(), tokenizer, folder)
        adapter = folder / ADAPTER_FOLDER
        adapter.mkdir()
        save_file(get_peft_model_state_dict(model), str(adapter / "adapter_model.safetensors"),
                  metadata={"format": "pt"})
        config = copy.deepcopy(model.peft_config["default"])
        config.base_model_name_or_path = str(Path(base_dir).resolve())
        config.save_pretrained(str(adapter))

    def load_base(self, model, base_dir):
        load_exact(model, Path(base_dir) / WEIGHTS)

    def load_weights(self, model, folder):
        from peft import set_peft_model_state_dict
        from safetensors.torch import load_file

        loaded = set_peft_model_state_dict(model, load_file(str(folder / ADAPTER_FOLDER / "adapter_model.safetensors")))
        if loaded.unexpected_keys:
            raise RuntimeError(f"{folder / ADAPTER_FOLDER}: unexpected adapter weights {loaded.unexpected_keys[:3]}")


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
