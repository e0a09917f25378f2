"""Warm up a missing or partial MLM head with the encoder frozen, so that the base model is measured fairly."""

from __future__ import annotations

from typing import Callable

import torch
from tqdm.auto import tqdm

from adapt.common.seeding import step_seed
from adapt.training.encoder import head_parameter_names
from adapt.training.mlm_loss import MaskedOnlyMlm, MaskingPlan
from adapt.training.packing import BatchCursor, PackedSequences


def warm_up_head(model: torch.nn.Module, seqs: PackedSequences, plan: MaskingPlan, *, steps: int,
                 learning_rate: float, batch_size: int, seed: int, device: torch.device, autocast,
                 progress: bool, min_improvement: float = 0.0, window_steps: int = 25,
                 should_stop: Callable[[], bool] = lambda: False) -> tuple[list[float], bool]:
    """Train the MLM head alone (encoder frozen, run without gradients); return (losses, converged).

    Stops early when the mean loss over the last ``window_steps`` improves on the window before by less than
    ``min_improvement`` (relative); ``converged`` says whether that happened before ``steps`` ran out.
    ``should_stop()`` true (a stop signal) ends it after the current step.
    """
    head_names = set(head_parameter_names(model))
    frozen = {n: p.requires_grad for n, p in model.named_parameters()}
    for name, param in model.named_parameters():
        param.requires_grad_(name in head_names)
    head_params = [p for n, p in model.named_parameters() if n in head_names]
    optimizer = torch.optim.AdamW(head_params, lr=learning_rate, weight_decay=0.0,
                                  fused=device.type in ("cpu", "cuda"))
    loss_module = MaskedOnlyMlm(model).to(device).train()
    cursor = BatchCursor(len(seqs), min(batch_size, len(seqs)), step_seed(seed, 0x4EAD))
    losses: list[float] = []
    converged = False
    bar = tqdm(range(steps), desc="head warm-up", unit="step", disable=not progress)
    for step in bar:
        if should_stop():
            break
        idx = cursor.next_indices()
        g = torch.Generator().manual_seed(step_seed(seed, 0x4EAD, step))
        ids, labels = plan.apply(seqs.input_ids[idx], seqs.attention_mask[idx], g, seqs.word_starts[idx])
        torch.manual_seed(step_seed(seed, 0x4EAD, step, 1))  # dropout draws
        with autocast():
            loss = loss_module(ids.to(device), seqs.attention_mask[idx].to(device), labels.to(device),
                               body_grad=False)
        loss.backward()
        optimizer.step()
        optimizer.zero_grad(set_to_none=True)
        losses.append(float(loss.detach()))
        bar.set_postfix(loss=f"{losses[-1]:.3f}")
        if min_improvement > 0 and len(losses) >= 2 * window_steps and len(losses) % window_steps == 0:
            last = sum(losses[-window_steps:]) / window_steps
            before = sum(losses[-2 * window_steps:-window_steps]) / window_steps
            if before - last < min_improvement * before:
                converged = True
                break
    bar.close()
    for name, param in model.named_parameters():
        param.requires_grad_(frozen[name])
    return losses, converged
