"""MLM-head warm-up on the packaged encoder: the old full-model loop vs the cached-state fit.

old:    train the head with the encoder frozen, one full forward per step (200 steps of 16 sequences, lr 1e-2,
        the defaults before the cached fit; a private copy of that loop lives below, for this comparison only).
cached: adapt.training.head_warmup.warm_up_head with the HeadWarmupConfig defaults.
Both start from the same freshly loaded head, train on the same sequences and are scored by the full model on the
same held-out masked sequences (a fixed seeded mask). Texts: the invented legal samples (corpora_samples/legal),
packed into 128-token sequences. ``to_pass_old``: the fewest epochs (a fresh run each, encoder pass included)
after which the cached fit scores below the old loop. Prints JSON.
Usage: python benchmarks/head_warmup.py [--old-steps 200] [--start informed|random|both] [--sample-seqs N ...]
"""

from __future__ import annotations

import argparse
import contextlib
import json
import platform
import subprocess
import time
from pathlib import Path

import numpy as np
import torch
import transformers

from adapt.common.seeding import step_seed
from adapt.config.common import EncoderConfig
from adapt.config.pretrain import HeadWarmupConfig
from adapt.training.encoder import head_parameter_names, load_mlm, load_tokenizer
from adapt.training.head_warmup import warm_up_head
from adapt.training.mlm_loss import FixedMaskEval, MaskedOnlyMlm, MaskingPlan
from adapt.training.packing import BatchCursor, PackedSequences, SequencePacker
from adapt.training.token_cache import word_starts

SAMPLES = Path(__file__).resolve().parents[1] / "corpora_samples" / "legal"
SEQ_LEN, HELDOUT_SEQS, SEED = 128, 48, 0


def packed_samples(tokenizer) -> tuple[PackedSequences, PackedSequences]:
    """(train, held-out) sequences of the legal samples; the held-out ones are the last HELDOUT_SEQS full rows."""
    texts = [json.loads(line)["text"] for path in sorted(SAMPLES.glob("*.jsonl"))
             for line in path.read_text(encoding="utf-8").splitlines() if line.strip()]
    enc = tokenizer(texts, add_special_tokens=False, return_attention_mask=False, return_token_type_ids=False)
    packer = SequencePacker(SEQ_LEN, tokenizer.cls_token_id, tokenizer.sep_token_id, tokenizer.pad_token_id)
    full = packer.add(enc["input_ids"], word_starts(enc))  # full rows only: no padded tail
    order = np.random.default_rng(SEED).permutation(len(full.ids))
    train, held = order[HELDOUT_SEQS:], order[:HELDOUT_SEQS]
    return (PackedSequences(full.ids[train], SEQ_LEN, len(texts), full.starts[train]),
            PackedSequences(full.ids[held], SEQ_LEN, len(texts), full.starts[held]))


def old_warm_up(model, seqs: PackedSequences, plan: MaskingPlan, steps: int, learning_rate: float,
                batch_size: int) -> None:
    """The full-model warm-up as it was (no early stop): every step a masked batch through encoder and head."""
    names = set(head_parameter_names(model))
    for name, param in model.named_parameters():
        param.requires_grad_(name in names)
    optimizer = torch.optim.AdamW([p for n, p in model.named_parameters() if n in names], lr=learning_rate,
                                  weight_decay=0.0, fused=True)
    loss_module = MaskedOnlyMlm(model).train()
    cursor = BatchCursor(len(seqs), batch_size, step_seed(SEED, 0x4EAD))
    for step in range(steps):
        idx = cursor.next_indices()
        g = torch.Generator().manual_seed(step_seed(SEED, 0x4EAD, step))
        ids, labels = plan.apply(seqs.input_ids[idx], seqs.attention_mask[idx], g, seqs.word_starts[idx])
        torch.manual_seed(step_seed(SEED, 0x4EAD, step, 1))
        loss_module(ids, seqs.attention_mask[idx], labels, body_grad=False).backward()
        optimizer.step()
        optimizer.zero_grad(set_to_none=True)
    for param in model.parameters():
        param.requires_grad_(True)


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--old-steps", type=int, default=200)
    parser.add_argument("--skip-old", action="store_true", help="only the cached fit (the old loop takes minutes)")
    parser.add_argument("--start", choices=("informed", "random", "both"), default="informed",
                        help="informed: the missing output bias at the log label frequency and the missing "
                             "transform at a scaled identity (what pretrain does); random: both left at their "
                             "random init")
    parser.add_argument("--sample-seqs", type=int, nargs="+", default=None,
                        help="HeadWarmupConfig.sample_seqs values to fit in turn (default: the config's)")
    args = parser.parse_args()
    transformers.logging.set_verbosity_error()
    cpu = torch.device("cpu")
    tokenizer = load_tokenizer(EncoderConfig())
    plan = MaskingPlan(tokenizer, 0.15, 0.8, 0.1)
    train, held = packed_samples(tokenizer)
    fixed = FixedMaskEval(held, plan, SEED, HELDOUT_SEQS, 16)  # the same masked held-out sequences for both
    no_autocast = contextlib.nullcontext
    results: dict = {"cpu": _cpu_name(), "torch": torch.__version__,
                     "cpu_capability": torch.backends.cpu.get_cpu_capability(), "threads": torch.get_num_threads(),
                     "train_seqs": len(train), "heldout_seqs": len(held), "heldout_masked": fixed.num_masked}

    model, _ = load_mlm(EncoderConfig())
    results["untrained_heldout_loss"] = fixed.loss(MaskedOnlyMlm(model), cpu, no_autocast)
    if not args.skip_old:
        start = time.perf_counter()
        old_warm_up(model, train, plan, args.old_steps, 1e-2, 16)
        results["old"] = {"steps": args.old_steps, "batch_size": 16, "seconds": time.perf_counter() - start,
                          "heldout_loss": fixed.loss(MaskedOnlyMlm(model), cpu, no_autocast)}
    sizes = args.sample_seqs or [HeadWarmupConfig().sample_seqs]
    starts = {"informed": [True], "random": [False], "both": [False, True]}[args.start]
    for sample_seqs, informed in [(n, i) for n in sizes for i in starts]:
        h = HeadWarmupConfig(sample_seqs=sample_seqs)
        model, report = load_mlm(EncoderConfig())
        start = time.perf_counter()
        warm = _cached_fit(model, report, train, plan, h, informed, h.max_epochs, h.min_improvement)
        key = ("cached_informed_start" if informed else "cached_random_start") + (
            f"_{sample_seqs}_seqs" if len(sizes) > 1 else "")
        results[key] = {"seconds": time.perf_counter() - start, "encode_seconds": warm.encode_seconds,
                        "fit_seconds": warm.fit_seconds, "epochs": len(warm.train_losses), "steps": warm.steps,
                        "converged": warm.converged, "cached_train_positions": warm.num_train,
                        "cached_heldout_positions": warm.num_heldout,
                        "own_heldout_losses": warm.heldout_losses,
                        "heldout_loss": fixed.loss(MaskedOnlyMlm(model), cpu, no_autocast),
                        "config": {k: getattr(h, k) for k in ("sample_seqs", "heldout_share", "max_epochs",
                                                              "learning_rate", "batch_size", "min_improvement")}}
        if "old" in results:
            results[f"time_ratio_{key}_over_old"] = results[key]["seconds"] / results["old"]["seconds"]
            results[key]["to_pass_old"] = _time_to_pass(results["old"]["heldout_loss"], train, plan, fixed, h,
                                                       informed, len(warm.train_losses))
            results[f"time_ratio_{key}_to_pass_old"] = (results[key]["to_pass_old"]["seconds"]
                                                        / results["old"]["seconds"])
    print(json.dumps(_rounded(results), indent=2))


def _cached_fit(model, report, train, plan, h, informed: bool, max_epochs: int, min_improvement: float):
    """warm_up_head with the HeadWarmupConfig ``h``; ``informed``: the checkpoint's missing weights get their
    informed start (what the stage does), else they stay at their random init."""
    return warm_up_head(model, train, plan, sample_seqs=h.sample_seqs, heldout_share=h.heldout_share,
                        max_epochs=max_epochs, learning_rate=h.learning_rate, batch_size=h.batch_size,
                        min_improvement=min_improvement, seed=SEED, device=torch.device("cpu"),
                        autocast=contextlib.nullcontext, progress=False,
                        missing=report.missing if informed else ())


def _time_to_pass(target: float, train, plan, fixed, h, informed: bool, most_epochs: int) -> dict:
    """The shortest warm-up (1, 2, ... epochs, no early stop; each a fresh run from the loaded head, encoder pass
    included) whose head scores below ``target`` on the fixed held-out sequences, and its seconds."""
    cpu, no_autocast = torch.device("cpu"), contextlib.nullcontext
    for epochs in range(1, most_epochs + 1):
        model, report = load_mlm(EncoderConfig())
        start = time.perf_counter()
        _cached_fit(model, report, train, plan, h, informed, epochs, 0)
        seconds = time.perf_counter() - start
        loss = fixed.loss(MaskedOnlyMlm(model), cpu, no_autocast)
        if loss < target:
            return {"epochs": epochs, "seconds": seconds, "heldout_loss": loss}
    return {"epochs": None, "seconds": float("nan"), "heldout_loss": None}


def _cpu_name() -> str:
    try:
        out = subprocess.run(["lscpu"], capture_output=True, text=True, check=False).stdout
        return next(l.split(":", 1)[1].strip() for l in out.splitlines() if l.startswith("Model name"))
    except (OSError, StopIteration):
        return platform.processor()


def _rounded(value):
    if isinstance(value, float):
        return round(value, 4)
    if isinstance(value, dict):
        return {k: _rounded(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_rounded(v) for v in value]
    return value


if __name__ == "__main__":
    main()
