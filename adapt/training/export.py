"""What the pretrain stage leaves behind besides checkpoints: plain exported models (the model cards are in
adapt.training.model_card) and the exact pseudo-perplexity figures measured at the start and end of a run."""

from __future__ import annotations

import contextlib
import shutil
from pathlib import Path
from typing import Callable

import torch
from safetensors import SafetensorError

from adapt.common.errors import InputError
from adapt.common.io import fsync_tree, hash_file, new_file_mode, replace_folder
from adapt.config.pretrain import PretrainJob
from adapt.training.encoder import EXPORT_CONFIG

WEIGHTS = "model.safetensors"
ONE_FILE = "1000GB"  # max_shard_size that keeps every weight in one safetensors file


def write_model_folder(model: torch.nn.Module, tokenizer, folder: Path) -> None:
    """Write into ``folder`` what plain ``AutoModelForMaskedLM.from_pretrained`` loads: config, safetensors
    weights (one file, so that a checkpoint restores from it directly), tokenizer files."""
    folder.mkdir(parents=True, exist_ok=True)
    with _exported_config(model):
        model.save_pretrained(folder, safe_serialization=True, max_shard_size=ONE_FILE)
    tokenizer.save_pretrained(folder)
    mode = new_file_mode()  # transformers writes the weights owner-only; a shared folder needs what the umask gives
    for weights in folder.glob("*.safetensors"):
        weights.chmod(mode)


@contextlib.contextmanager
def _exported_config(model: torch.nn.Module):
    """While ``model`` is written, ``model.config`` holds the checkpoint's own values of settings changed for
    training only (encoder.attention_dropout), so that every folder written (base/, checkpoints, final/, and best/
    as a checkpoint's copy) fine-tunes like the starting encoder; the training values come back afterwards."""
    exported = getattr(model, EXPORT_CONFIG, None) or {}
    training = {attr: getattr(model.config, attr) for attr in exported}
    for attr, value in exported.items():
        setattr(model.config, attr, value)
    try:
        yield
    finally:
        for attr, value in training.items():
            setattr(model.config, attr, value)


def export_checkpoint(model: torch.nn.Module, tokenizer, folder: Path,
                      extra: Callable[[Path], None] | None = None) -> dict[str, dict]:
    """Write the model folder ``folder`` (``base/``, ``final/``) atomically: into a temporary folder beside it,
    fsynced, then renamed over it, so that a kill or a full disk never leaves a half-written one and an earlier
    complete one stays until the new one is in place. ``extra(tmp)`` adds files (the model card). Returns the size
    and sha256 of the weights file. A failed write raises ``InputError`` naming the folder."""
    return _write_atomically(folder, lambda tmp: write_model_folder(model, tokenizer, tmp), extra)


# what a checkpoint holds besides its model folder (the resume state and a LoRA run's peft-format adapters)
CHECKPOINT_ONLY = ("optimizer.pt", "scheduler.pt", "state.json", "adapter")


def export_saved(checkpoint: Path, folder: Path, extra: Callable[[Path], None] | None = None) -> dict[str, dict]:
    """``folder`` (``best/``) as a byte-for-byte copy of a checkpoint's model files (a plain model folder, adapters
    merged), written as atomically as ``export_checkpoint``."""
    def copy(tmp: Path) -> None:
        tmp.mkdir(parents=True)
        for path in sorted(Path(checkpoint).iterdir()):
            if path.is_file() and path.name not in CHECKPOINT_ONLY:
                shutil.copyfile(path, tmp / path.name)

    return _write_atomically(folder, copy, extra)


def _write_atomically(folder: Path, write: Callable[[Path], None],
                      extra: Callable[[Path], None] | None) -> dict[str, dict]:
    folder = Path(folder)
    tmp = folder.with_name(f".incomplete-{folder.name}")
    shutil.rmtree(tmp, ignore_errors=True)
    try:
        write(tmp)
        if extra is not None:
            extra(tmp)
        weights = tmp / WEIGHTS
        digest = {"bytes": weights.stat().st_size, "sha256": hash_file(weights)}
        fsync_tree(tmp)
        replace_folder(tmp, folder)
    except (OSError, SafetensorError) as exc:
        shutil.rmtree(tmp, ignore_errors=True)
        raise InputError(f"{folder} could not be written ({getattr(exc, 'filename', None) or tmp}: "
                         f"{getattr(exc, 'strerror', None) or exc}); the run's checkpoints are intact: free space "
                         "or fix the folder, then run the same command again to finish") from exc
    return digest


CI_LOW, CI_HIGH = "_ci_low", "_ci_high"  # suffixes of a figure's 95% interval in the start and end records
PPPL_RESAMPLES = 1000


def measure_pppl(model: torch.nn.Module, tokenizer, texts: dict[str, list[str]], cfg: PretrainJob,
                 precision: str) -> dict[str, float]:
    """Exact pseudo-perplexity on ``eval.pppl_max_tokens`` tokens of a seeded random sample of each held-out set
    (keys ``pppl_<name>``, with its 95% percentile bootstrap interval over documents in ``pppl_<name>_ci_low``
    and ``_ci_high``); the same documents and tokens at the start and at the end of a run.
    ``precision`` is the run's resolved one ("fp32" or "bf16")."""
    if cfg.eval.pppl_max_tokens <= 0:
        return {}
    from adapt.evaluation.pppl import bootstrap_ci, pseudo_perplexity, score_documents

    out = {}
    for name, docs in texts.items():
        scores = score_documents(model, tokenizer, docs, max_seq_len=cfg.encoder.max_seq_len,
                                 batch_size=cfg.eval.pppl_batch_size, precision=precision,
                                 progress=cfg.runtime.progress, max_tokens=cfg.eval.pppl_max_tokens)
        out[f"pppl_{name}"] = pseudo_perplexity(scores)
        if len(scores.tokens) >= 2:
            low, high = bootstrap_ci(scores.pll, scores.tokens, PPPL_RESAMPLES, cfg.seed)
            out[f"pppl_{name}{CI_LOW}"], out[f"pppl_{name}{CI_HIGH}"] = low, high
    return out
