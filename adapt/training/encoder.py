"""The one encoder loader: tokenizer, masked-LM model (with a check of its MLM head) or the encoder body alone,
each with ``trust_remote_code`` off unless the caller turns it on.

``name_or_path`` is resolved by ``adapt.contracts.model_folder``: a local folder, a pretrain run folder (its
``final/``), a model id already in the local cache (no download is attempted when HF_HUB_OFFLINE=1), or
``packaged:all-minilm-l6-v2`` for the encoder shipped as a Python package.
"""

from __future__ import annotations

import hashlib
import json
import logging
from dataclasses import dataclass, field
from pathlib import Path

import torch
from transformers import (AutoConfig, AutoModel, AutoModelForMaskedLM, AutoTokenizer, PreTrainedModel,
                          PreTrainedTokenizerBase)

from adapt.config.common import PACKAGED_ENCODER, EncoderConfig
from adapt.common.errors import ConfigError, InputError
from adapt.contracts.model_folder import resolve_model_folder

log = logging.getLogger(__name__)

KEY = "encoder.name_or_path"
# Config attributes holding the dropout on attention probabilities (transformers 5.24's config classes: BERT,
# RoBERTa, XLM-R, ELECTRA, ALBERT, MPNet, DeBERTa-v2 use the first; DistilBERT, ModernBERT the second).
ATTENTION_DROPOUT_ATTRS = ("attention_probs_dropout_prob", "attention_dropout")
# Model attribute set by load_mlm: config values written into exported folders instead of the training ones
# (adapt.training.export.write_model_folder), so that fine-tuning sees the checkpoint's own settings.
EXPORT_CONFIG = "export_config_values"


def _unloadable(setting: str, path: str, exc: Exception) -> InputError:
    """``setting`` is ``key=value`` as the user wrote it; ``path`` what it resolved to."""
    what = "folder" if Path(path).exists() else "model id (not a local folder, not in the local cache)"
    return InputError(f"{setting}: cannot load this {what} "
                      f"({type(exc).__name__}: {str(exc).splitlines()[0][:160]}); give a folder with config.json, "
                      f"weights and tokenizer files, or {PACKAGED_ENCODER}")


def open_tokenizer(path: str, trust_remote_code: bool = False, setting: str | None = None) -> PreTrainedTokenizerBase:
    """The tokenizer of a resolved model folder (or cached model id), with no further checks."""
    try:
        return AutoTokenizer.from_pretrained(path, trust_remote_code=trust_remote_code)
    except (OSError, ValueError) as exc:
        raise _unloadable(setting or f"{KEY}={path}", path, exc) from exc


def vocab_sha256(tokenizer: PreTrainedTokenizerBase) -> str:
    """sha256 of the tokenizer's vocabulary (token -> id pairs, sorted by id) and its lower-casing rule."""
    vocab = sorted(tokenizer.get_vocab().items(), key=lambda kv: kv[1])
    lower = getattr(tokenizer, "do_lower_case", None)
    return hashlib.sha256(json.dumps([lower, vocab], ensure_ascii=False).encode("utf-8")).hexdigest()


def open_config(path: str, trust_remote_code: bool = False, setting: str | None = None, **overrides):
    """The model config of ``path`` with ``overrides`` applied (no weights are read)."""
    try:
        return AutoConfig.from_pretrained(path, trust_remote_code=trust_remote_code, **overrides)
    except (OSError, ValueError) as exc:
        raise _unloadable(setting or f"{KEY}={path}", path, exc) from exc


def check_loadable(path: str, trust_remote_code: bool = False, setting: str | None = None) -> None:
    """Cheap early check that the config and the tokenizer of ``path`` load (no weights are read)."""
    open_config(path, trust_remote_code, setting)
    open_tokenizer(path, trust_remote_code, setting)


def load_body(path: str, trust_remote_code: bool = False, setting: str | None = None) -> PreTrainedModel:
    """The encoder body of ``path`` (``AutoModel``, fp32): an MLM head in the checkpoint is not loaded; a pooler
    the checkpoint lacks is initialised from the torch RNG."""
    try:
        return AutoModel.from_pretrained(path, trust_remote_code=trust_remote_code, dtype=torch.float32)
    except (OSError, ValueError) as exc:
        raise _unloadable(setting or f"{KEY}={path}", path, exc) from exc


def load_tokenizer(cfg: EncoderConfig) -> PreTrainedTokenizerBase:
    """The tokenizer of ``cfg``, checked for what masked-LM training needs (fast, with a mask token)."""
    path = resolve_model_folder(cfg.name_or_path, KEY)
    tok = open_tokenizer(path, cfg.trust_remote_code, f"{KEY}={cfg.name_or_path}")
    if not tok.is_fast:
        raise InputError(f"encoder.name_or_path={cfg.name_or_path}: needs a fast tokenizer (tokenizer.json); "
                         "convert it with transformers' AutoTokenizer.from_pretrained(..., use_fast=True)")
    if tok.mask_token_id is None:
        raise InputError(f"encoder.name_or_path={cfg.name_or_path}: the tokenizer has no mask token, so it cannot "
                         "be trained with masked-language modelling; choose an encoder (BERT-like) checkpoint")
    return tok


@dataclass
class HeadReport:
    """What the checkpoint held for the MLM head. ``missing`` lists head weights that were initialised at random."""

    missing: list[str] = field(default_factory=list)
    unexpected: list[str] = field(default_factory=list)
    head_params: int = 0

    @property
    def needs_warmup(self) -> bool:
        return bool(self.missing)


def head_parameter_names(model: PreTrainedModel) -> list[str]:
    """Names of parameters outside the encoder body (the MLM head), e.g. ``cls.predictions.*`` for BERT."""
    prefix = model.base_model_prefix + "."
    return [n for n, _ in model.named_parameters() if not n.startswith(prefix)]


def load_mlm(cfg: EncoderConfig, path: str | None = None,
             attention_dropout: float | None = None) -> tuple[PreTrainedModel, HeadReport]:
    """Load a masked-LM model in fp32; report head weights the checkpoint did not contain. ``attention_dropout``
    (None = the checkpoint's own) is set on the config before the model is built; the model keeps the
    checkpoint's value in ``EXPORT_CONFIG`` for the folders written from it."""
    path = path or resolve_model_folder(cfg.name_or_path, KEY)
    setting = f"{KEY}={cfg.name_or_path}"
    if cfg.random_init:
        config = open_config(path, cfg.trust_remote_code, setting, **dict(cfg.random_overrides))
        exported = _set_attention_dropout(config, attention_dropout, cfg.name_or_path)
        with torch.random.fork_rng():  # fixed init so smoke runs are reproducible
            torch.manual_seed(0)
            model = AutoModelForMaskedLM.from_config(config)
        setattr(model, EXPORT_CONFIG, exported)
        return model, HeadReport(head_params=_count(model, head_parameter_names(model)))
    exported = {}
    if attention_dropout is not None:
        exported = _set_attention_dropout(open_config(path, cfg.trust_remote_code, setting), attention_dropout,
                                          cfg.name_or_path)
    overrides = {attr: float(attention_dropout) for attr in exported}  # config kwargs: override config.json's
    try:
        with torch.random.fork_rng():  # missing head weights get the same random init on every load
            torch.manual_seed(0)
            model, info = AutoModelForMaskedLM.from_pretrained(path, trust_remote_code=cfg.trust_remote_code,
                                                               output_loading_info=True, dtype=torch.float32,
                                                               **overrides)
    except (OSError, ValueError) as exc:
        raise _unloadable(setting, path, exc) from exc
    setattr(model, EXPORT_CONFIG, exported)
    prefix = model.base_model_prefix + "."
    missing = sorted(k for k in info.get("missing_keys", []) if not k.startswith(prefix))
    body_missing = sorted(k for k in info.get("missing_keys", []) if k.startswith(prefix))
    if body_missing:
        raise InputError(f"encoder.name_or_path={cfg.name_or_path}: the checkpoint lacks encoder weights "
                         f"({', '.join(body_missing[:3])}...); it is not a complete encoder checkpoint")
    report = HeadReport(missing=missing, unexpected=sorted(info.get("unexpected_keys", [])),
                        head_params=_count(model, head_parameter_names(model)))
    if report.missing:
        log.warning("MLM head missing or partial in %s: %d weights initialised at random (%s...); "
                    "masked-token predictions are meaningless until the head is trained", cfg.name_or_path,
                    len(missing), ", ".join(missing[:2]))
    return model, report


def _attention_dropout_attr(config) -> str | None:
    return next((a for a in ATTENTION_DROPOUT_ATTRS if hasattr(config, a)), None)


def _set_attention_dropout(config, attention_dropout: float | None, name: str) -> dict[str, float]:
    """Set the attention-probability dropout on ``config``; returns the checkpoint's value by attribute ({} when
    ``attention_dropout`` is None). Refuses an architecture whose config has no such attribute."""
    if attention_dropout is None:
        return {}
    attr = _attention_dropout_attr(config)
    if attr is None:
        raise ConfigError(f"encoder.attention_dropout={attention_dropout}: the config of {name} "
                          f"({config.model_type}) has no attention-probability dropout "
                          f"({' or '.join(ATTENTION_DROPOUT_ATTRS)}); set encoder.attention_dropout=null")
    exported = {attr: getattr(config, attr)}
    setattr(config, attr, float(attention_dropout))
    return exported


def attention_dropout_values(model: torch.nn.Module) -> dict[str, float | None]:
    """The attention-probability dropout of a model ``load_mlm`` built: ``training`` (its config now) and
    ``exported`` (what config.json of its exported folders carries); None where the architecture has none."""
    config = unwrap_peft(model).config
    attr = _attention_dropout_attr(config)
    training = None if attr is None else getattr(config, attr)
    return {"training": training, "exported": getattr(model, EXPORT_CONFIG, {}).get(attr, training)}


def _count(model: torch.nn.Module, names: list[str]) -> int:
    params = dict(model.named_parameters())
    return sum(params[n].numel() for n in names)


def unwrap_peft(model: torch.nn.Module) -> torch.nn.Module:
    """The transformers model inside a peft wrapper (adapter layers stay injected), or the model itself."""
    get_base = getattr(model, "get_base_model", None)
    return get_base() if callable(get_base) else model


def mlm_head(model: torch.nn.Module) -> torch.nn.Module | None:
    """The module mapping hidden states to vocabulary logits (BERT: ``cls``, RoBERTa-like: ``lm_head``)."""
    inner = unwrap_peft(model)
    for name in ("cls", "lm_head"):
        head = getattr(inner, name, None)
        if isinstance(head, torch.nn.Module):
            return head
    return None


def encoder_body(model: torch.nn.Module) -> torch.nn.Module:
    inner = unwrap_peft(model)
    return getattr(inner, inner.base_model_prefix)
