"""What the pretrain stage leaves behind besides checkpoints: plain exported models, a model card, and the
exact pseudo-perplexity figures measured at the start and end of a run."""

from __future__ import annotations

import shutil
from pathlib import Path
from typing import Callable

import torch
from safetensors import SafetensorError

from adapt.common.errors import InputError
from adapt.common.io import atomic_write_text, fsync_tree, hash_file, replace_folder
from adapt.config.pretrain import PretrainJob

CAUTION = ("Trained on text that may come from legal or clinical records. De-identify before training, follow the "
           "data-protection law that applies to you and your institution's governance, and check the corpus audit "
           "(profile.md) before sharing this model: it may have memorised rare strings. Its outputs are not legal "
           "or medical advice.")
WEIGHTS = "model.safetensors"
ONE_FILE = "1000GB"  # max_shard_size that keeps every weight in one safetensors file


def write_model_folder(model: torch.nn.Module, tokenizer, folder: Path) -> None:
    """Write into ``folder`` what plain ``AutoModelForMaskedLM.from_pretrained`` loads: config, safetensors
    weights (one file, so that a checkpoint restores from it directly), tokenizer files."""
    folder.mkdir(parents=True, exist_ok=True)
    model.save_pretrained(folder, safe_serialization=True, max_shard_size=ONE_FILE)
    tokenizer.save_pretrained(folder)


def export_checkpoint(model: torch.nn.Module, tokenizer, folder: Path,
                      extra: Callable[[Path], None] | None = None) -> dict[str, dict]:
    """Write the model folder ``folder`` (``base/``, ``final/``) atomically: into a temporary folder beside it,
    fsynced, then renamed over it, so that a kill or a full disk never leaves a half-written one and an earlier
    complete one stays until the new one is in place. ``extra(tmp)`` adds files (the model card). Returns the size
    and sha256 of the weights file. A failed write raises ``InputError`` naming the folder."""
    folder = Path(folder)
    tmp = folder.with_name(f".incomplete-{folder.name}")
    shutil.rmtree(tmp, ignore_errors=True)
    try:
        write_model_folder(model, tokenizer, tmp)
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


def measure_pppl(model: torch.nn.Module, tokenizer, texts: dict[str, list[str]], cfg: PretrainJob,
                 precision: str) -> dict[str, float]:
    """Exact pseudo-perplexity on the first ``eval.pppl_max_tokens`` tokens of each held-out set
    (keys ``pppl_<name>``); the same documents and tokens at the start and at the end of a run.
    ``precision`` is the run's resolved one ("fp32" or "bf16")."""
    if cfg.eval.pppl_max_tokens <= 0:
        return {}
    from adapt.evaluation.pppl import pseudo_perplexity, score_documents

    out = {}
    for name, docs in texts.items():
        scores = score_documents(model, tokenizer, docs, max_seq_len=cfg.encoder.max_seq_len,
                                 batch_size=cfg.eval.pppl_batch_size, precision=precision,
                                 progress=cfg.runtime.progress, max_tokens=cfg.eval.pppl_max_tokens)
        out[f"pppl_{name}"] = pseudo_perplexity(scores)
    return out


def write_model_card(folder: Path, cfg: PretrainJob, result: dict) -> None:
    rows = "\n".join(f"| {k} | {result['start'].get(k, float('nan')):.4g} | {v:.4g} |"
                     for k, v in sorted(result["end"].items()))
    card = f"""# Domain-adapted encoder

Continued masked-language-model pretraining of `{cfg.encoder.name_or_path}` on the prepared corpus
`{cfg.corpus_dir}`, made with adapt.

- training variant: {cfg.adapter.kind} ({result['trainable_parameters']:,} of {result['total_parameters']:,} parameters trained)
- optimizer steps: {result['step']}; tokens seen: {result['tokens_seen']:,}; sequence length {cfg.encoder.max_seq_len}
- masking: rate {cfg.masking.rate}, mask {cfg.masking.mask_share} / random {cfg.masking.random_share} / keep the rest
- learning rate {cfg.schedule.learning_rate}, warmup {cfg.schedule.warmup_steps} steps, {cfg.schedule.decay} decay; seed {cfg.seed}
- MLM head weights missing in the starting checkpoint (warmed up before measuring the base): {len(result['head_missing'])}

## Held-out figures (base = starting encoder with warmed-up head)

| measure | base | adapted |
|---|---|---|
{rows}

Pseudo-perplexity figures are only comparable between models that share this tokenizer.

## Cautions

{CAUTION}
"""
    atomic_write_text(folder / "README.md", card)
