"""The run fingerprint: what defines a pretrain run, recorded in every checkpoint and compared on resume.

It holds every config key except ``RESUME_SAFE_KEYS`` (adapter settings only for the chosen kind), the number of
processes, and content hashes where a setting names a location: the encoder's weights as loaded, the tokenizer's
vocabulary, and the train/held-out shards of the corpora. A moved corpus or encoder folder with the same content
resumes; a changed masking rate, learning rate, LoRA rank, corpus shard or tokenizer is refused, naming each key.
"""

from __future__ import annotations

import hashlib
from typing import Any

import torch

from adapt.common.io import hash_file, to_jsonable
from adapt.config.common import optional_str
from adapt.config.pretrain import ADAPTER_SETTINGS, RESUME_SAFE_KEYS, PretrainJob
from adapt.contracts.prepared_corpus import split_shards

HASH_KEYS_SHOWN = 12  # hex digits of a hash shown in a refusal
_MISSING = object()  # a key one of the two fingerprints lacks (written by another version)


def weights_sha256(model: torch.nn.Module) -> str:
    """sha256 over every tensor of the state dict (name, dtype, shape, raw bytes), in name order."""
    h = hashlib.sha256()
    for name, tensor in sorted(model.state_dict().items()):
        t = tensor.detach().to("cpu").contiguous()
        h.update(f"{name}|{t.dtype}|{tuple(t.shape)}\n".encode())
        h.update(t.reshape(-1).view(torch.uint8).numpy())
    return h.hexdigest()


def shards_sha256(corpus_dir: str, split: str) -> str:
    """One sha256 over the names and content hashes of a split's Parquet shards."""
    lines = [f"{shard.name} {hash_file(shard)}" for shard in split_shards(corpus_dir, split)]
    return hashlib.sha256("\n".join(lines).encode()).hexdigest()


def _flatten(obj: Any, prefix: str = "") -> dict[str, Any]:
    if isinstance(obj, dict):
        out: dict[str, Any] = {}
        for key, value in obj.items():
            out.update(_flatten(value, f"{prefix}{key}."))
        return out
    return {prefix[:-1]: obj}


def build_fingerprint(cfg: PretrainJob, model: torch.nn.Module, tokenizer_vocab_sha256: str,
                      num_processes: int) -> dict[str, Any]:
    """The flat ``key -> value`` record of what defines this run (``model``: the encoder as loaded)."""
    flat = _flatten(to_jsonable(cfg))
    fingerprint = {k: v for k, v in flat.items() if k not in RESUME_SAFE_KEYS and not k.startswith("adapter.")}
    for name in ("kind",) + ADAPTER_SETTINGS[cfg.adapter.kind]:
        fingerprint[f"adapter.{name}"] = flat[f"adapter.{name}"]
    fingerprint["encoder.weights_sha256"] = weights_sha256(model)
    fingerprint["tokenizer.vocab_sha256"] = tokenizer_vocab_sha256
    fingerprint["corpus.train_sha256"] = shards_sha256(cfg.corpus_dir, "train")
    fingerprint["corpus.heldout_sha256"] = shards_sha256(cfg.corpus_dir, "heldout")
    general_dir = optional_str(cfg.general_dir)
    fingerprint["general.heldout_sha256"] = shards_sha256(general_dir, "heldout") if general_dir else None
    if general_dir and cfg.replay.share > 0:  # replay trains on its train split (absent key: no replay)
        fingerprint["general.train_sha256"] = shards_sha256(general_dir, "train")
    fingerprint["num_processes"] = num_processes
    return fingerprint


def _shown(key: str, value: Any) -> str:
    if key.endswith("sha256") and isinstance(value, str):
        return value[:HASH_KEYS_SHOWN]
    return "absent" if value is _MISSING else repr(value) if isinstance(value, str) else str(value)


def fingerprint_differences(saved: dict[str, Any], current: dict[str, Any]) -> list[str]:
    """``key: checkpoint <saved>, now <current>`` for every key whose value differs (in key order). A changed
    ``adapter.kind`` stands for the settings of the two kinds, which are not listed one by one."""
    kind_changed = saved.get("adapter.kind") != current.get("adapter.kind")
    out = []
    for key in sorted(set(saved) | set(current)):
        if kind_changed and key.startswith("adapter.") and key != "adapter.kind":
            continue
        before, now = saved.get(key, _MISSING), current.get(key, _MISSING)
        if before != now:
            out.append(f"{key}: checkpoint {_shown(key, before)}, now {_shown(key, now)}")
    return out
