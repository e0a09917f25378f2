"""Full training state on disk: atomic saves, rotation, resume lookup and interruption handling.

A checkpoint folder holds ``model.safetensors`` (every weight, adapters included), ``optimizer.pt`` and
``scheduler.pt`` (tensors and numbers only; loaded with ``weights_only=True``) and ``state.json`` (step, data
cursor, seed). ``checkpoints/index.json`` lists complete checkpoints; resume reads it, never folder names.
"""

from __future__ import annotations

import logging
import shutil
from pathlib import Path
from typing import Any

import torch
from safetensors.torch import load_model, save_model

from adapt.common.errors import ConfigError, InputError
from adapt.common.io import atomic_write_json, atomic_write_with, fsync_dir, read_json

log = logging.getLogger(__name__)

INDEX = "index.json"


def save_checkpoint(root: Path, step: int, model: torch.nn.Module, optimizer: torch.optim.Optimizer,
                    scheduler: Any, state: dict, keep_last: int) -> Path:
    """Write ``root/step-<step>`` atomically (temp folder, then rename), update the index, drop old ones."""
    root.mkdir(parents=True, exist_ok=True)
    final = root / f"step-{step}"
    tmp = root / f".incomplete-step-{step}"
    shutil.rmtree(tmp, ignore_errors=True)
    tmp.mkdir()
    # every file fsynced (with the folder) before the folder is renamed; the rename fsynced in its parent
    atomic_write_with(tmp / "model.safetensors", lambda p: save_model(model, str(p)))
    atomic_write_with(tmp / "optimizer.pt", lambda p: torch.save(optimizer.state_dict(), p))
    atomic_write_with(tmp / "scheduler.pt", lambda p: torch.save(scheduler.state_dict(), p))
    atomic_write_json(tmp / "state.json", {**state, "step": step})
    if final.exists():
        shutil.rmtree(final)
    tmp.rename(final)
    fsync_dir(root)
    entries = [e for e in _read_index(root) if e["step"] != step] + [{"step": step, "folder": final.name}]
    entries.sort(key=lambda e: e["step"])
    for old in entries[:-keep_last]:
        shutil.rmtree(root / old["folder"], ignore_errors=True)
    atomic_write_json(root / INDEX, {"checkpoints": entries[-keep_last:]})
    log.info("saved checkpoint %s", final)
    return final


def _read_index(root: Path) -> list[dict]:
    index = root / INDEX
    return read_json(index)["checkpoints"] if index.exists() else []


def latest_checkpoint(root: Path) -> Path | None:
    entries = [e for e in _read_index(root) if (root / e["folder"] / "state.json").exists()]
    return root / entries[-1]["folder"] if entries else None


def find_resume_point(resume: str, checkpoints_dir: Path) -> Path | None:
    """Apply ``resume=auto|never|<folder>``; returns the checkpoint folder to load or None for a fresh start."""
    latest = latest_checkpoint(checkpoints_dir)
    if resume == "auto":
        return latest
    if resume == "never":
        if latest is not None:
            raise ConfigError(f"resume=never but {checkpoints_dir.parent} already holds a run (checkpoint "
                              f"{latest.name}); use resume=auto to continue it or choose a new out_dir")
        return None
    path = Path(resume)
    if not (path / "state.json").exists():
        raise InputError(f"resume={resume}: not a checkpoint folder (no state.json); use resume=auto, "
                         "resume=never or a checkpoints/step-N folder")
    return path


def load_checkpoint(path: Path, model: torch.nn.Module, optimizer: torch.optim.Optimizer, scheduler: Any) -> dict:
    """Restore weights, optimizer and scheduler in place; return the saved ``state.json``."""
    missing, unexpected = load_model(model, str(path / "model.safetensors"), strict=False)
    if missing or unexpected:
        raise ConfigError(f"resume from {path}: the checkpoint does not fit this model (missing {missing[:2]}, "
                          f"unexpected {unexpected[:2]}); resume with the same encoder and adapter settings")
    optimizer.load_state_dict(torch.load(path / "optimizer.pt", weights_only=True))
    scheduler.load_state_dict(torch.load(path / "scheduler.pt", weights_only=True))
    return read_json(path / "state.json")
