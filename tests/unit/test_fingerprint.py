"""The run fingerprint's key lists stay in step with the config schema, and differences are named one by one."""

from __future__ import annotations

import dataclasses

import pytest

from adapt.common.errors import ConfigError
from adapt.config.pretrain import ADAPTER_KINDS, ADAPTER_SETTINGS, RESUME_SAFE_KEYS, AdapterConfig, PretrainJob
from adapt.training.fingerprint import fingerprint_differences


def _keys(cls, prefix: str = "") -> set[str]:
    out = set()
    for f in dataclasses.fields(cls):
        default = f.default_factory() if f.default_factory is not dataclasses.MISSING else f.default
        if dataclasses.is_dataclass(default):
            out |= _keys(type(default), f"{prefix}{f.name}.")
        else:
            out.add(prefix + f.name)
    return out


def test_every_resume_safe_key_is_a_config_key():
    assert set(RESUME_SAFE_KEYS) <= _keys(PretrainJob)  # a typo would silently fingerprint the key instead


def test_every_adapter_kind_lists_its_settings():
    assert sorted(ADAPTER_SETTINGS) == sorted(ADAPTER_KINDS)
    fields = {f.name for f in dataclasses.fields(AdapterConfig)}
    assert all(set(names) <= fields for names in ADAPTER_SETTINGS.values())


def test_differences_name_each_key_with_both_values():
    saved = {"masking.rate": 0.15, "seed": 0, "corpus.train_sha256": "a" * 64, "adapter.kind": "lora",
             "adapter.r": 8}
    now = {"masking.rate": 0.3, "seed": 0, "corpus.train_sha256": "b" * 64, "adapter.kind": "full"}
    assert fingerprint_differences(saved, now) == [
        "adapter.kind: checkpoint 'lora', now 'full'",  # the kind stands for its settings (adapter.r)
        f"corpus.train_sha256: checkpoint {'a' * 12}, now {'b' * 12}",
        "masking.rate: checkpoint 0.15, now 0.3"]


def test_fsdp_is_refused_in_one_line(monkeypatch):
    from adapt.stages import pretrain

    monkeypatch.setenv("ACCELERATE_USE_FSDP", "true")
    with pytest.raises(ConfigError, match="FSDP is not supported") as err:
        pretrain._accelerator(PretrainJob(corpus_dir="unused"))
    assert "\n" not in str(err.value)
