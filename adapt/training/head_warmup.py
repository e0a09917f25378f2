"""Warm up a missing or partial MLM head with the encoder frozen, so that the base model is measured fairly.

With the encoder frozen, the final hidden states at masked positions do not change while the head trains. So the
encoder runs once (eval mode, no gradients) over a seeded sample of masked training sequences, and the head is fit
for many epochs on those cached states alone: (M, H) rows and their labels instead of a full forward per step.
The head's transform and output bias train; a decoder tied to the word embeddings stays tied (and frozen with
them). A seeded share of the sampled sequences is held out, and the fit stops on the held-out loss.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from typing import Callable, Sequence

import torch
import torch.nn.functional as F
from tqdm.auto import tqdm

from adapt.common.seeding import step_seed
from adapt.training.encoder import encoder_body, head_parameter_names, mlm_head, unwrap_peft
from adapt.training.final_layer import final_states_at
from adapt.training.masking import IGNORE_INDEX
from adapt.training.mlm_loss import MaskingPlan
from adapt.training.packing import PackedSequences

SALT = 0x4EAD


@dataclass
class MaskedStates:
    """Final hidden states at the masked positions of some sequences: ``hidden`` (M, H) float32, ``labels`` (M,)
    and ``rows`` (M,), the sampled sequence (0 .. n-1) each position came from."""

    hidden: torch.Tensor
    labels: torch.Tensor
    rows: torch.Tensor

    def subset(self, keep: torch.Tensor) -> "MaskedStates":
        return MaskedStates(self.hidden[keep], self.labels[keep], self.rows[keep])


@dataclass
class WarmupResult:
    """``heldout_losses``: held-out loss before the fit, then after each epoch; ``train_losses``: mean training loss
    of each epoch; ``steps``: optimizer steps; ``converged``: stopped by the held-out criterion; the head kept is
    the one of the lowest held-out loss (``best_loss``). ``stopped``: a stop signal ended it early."""

    heldout_losses: list[float]
    train_losses: list[float]
    steps: int
    converged: bool
    stopped: bool
    num_train: int
    num_heldout: int
    encode_seconds: float
    fit_seconds: float

    @property
    def best_loss(self) -> float:
        return min(self.heldout_losses)


def sample_rows(num_seqs: int, sample_seqs: int, heldout_share: float, seed: int) -> tuple[torch.Tensor, int]:
    """(rows, n_heldout): a seeded sample of at most ``sample_seqs`` sequence rows; the first n_heldout of them
    (at least one, and at least one left to train on) are the held-out ones."""
    if num_seqs < 2:
        raise RuntimeError(f"the head warm-up needs at least 2 training sequences (one held out), got {num_seqs}")
    g = torch.Generator().manual_seed(step_seed(seed, SALT))
    rows = torch.randperm(num_seqs, generator=g)[:min(sample_seqs, num_seqs)]
    n_heldout = min(max(1, round(heldout_share * len(rows))), len(rows) - 1)
    return rows, n_heldout


@torch.no_grad()
def cache_masked_states(model: torch.nn.Module, seqs: PackedSequences, plan: MaskingPlan, rows: torch.Tensor, *,
                        seed: int, batch_size: int, device: torch.device, autocast,
                        should_stop: Callable[[], bool] = lambda: False) -> MaskedStates | None:
    """One eval-mode, gradient-free pass of the encoder over ``rows`` with a seeded mask (None: stopped)."""
    g = torch.Generator().manual_seed(step_seed(seed, SALT, 1))
    _, mask, masked, labels = plan.apply_rows(seqs, rows, g)  # (n, T): one mask for the whole sample
    body = encoder_body(model)
    was_training = model.training
    model.eval()  # no dropout: the cached states are the ones the frozen encoder gives
    hidden, kept, owner = [], [], []
    try:
        for start in range(0, len(rows), batch_size):
            if should_stop():
                return None
            sl = slice(start, start + batch_size)
            selected = labels[sl] != IGNORE_INDEX  # (B, T)
            with autocast():  # (m, H): the last layer at the masked positions only, where the encoder allows it
                states = final_states_at(body, masked[sl].to(device), mask[sl].to(device), selected.to(device))
            hidden.append(states.float().cpu())
            kept.append(labels[sl][selected])
            owner.append(torch.arange(start, start + selected.shape[0]).unsqueeze(1).expand_as(selected)[selected])
    finally:
        model.train(was_training)
    return MaskedStates(torch.cat(hidden), torch.cat(kept), torch.cat(owner))


def heldout_loss(head: torch.nn.Module, states: MaskedStates, batch_size: int, device: torch.device,
                 autocast) -> float:
    """Mean cross-entropy of ``head`` over the cached positions."""
    total = 0.0
    with torch.no_grad():
        for start in range(0, len(states.labels), batch_size):
            sl = slice(start, start + batch_size)
            with autocast():
                logits = head(states.hidden[sl].to(device))  # (m, V)
            total += float(F.cross_entropy(logits.float(), states.labels[sl].to(device), reduction="sum"))
    return total / max(len(states.labels), 1)


def flat_twice(heldout_losses: list[float], min_improvement: float) -> bool:
    """True when each of the last two windows improved the held-out loss by less than ``min_improvement``
    (relative to the window before); 0 never stops."""
    if min_improvement <= 0 or len(heldout_losses) < 3:
        return False
    a, b, c = heldout_losses[-3:]
    return a - b < min_improvement * a and b - c < min_improvement * b


def output_bias(model: torch.nn.Module) -> torch.nn.Parameter | None:
    """The bias of the vocabulary projection (BERT: cls.predictions.bias, shared with the decoder), if any."""
    out = unwrap_peft(model).get_output_embeddings()
    return getattr(out, "bias", None) if out is not None else None


def square_transform(model: torch.nn.Module) -> torch.nn.Linear | None:
    """The head's hidden-to-hidden projection before the vocabulary one (BERT: cls.predictions.transform.dense,
    RoBERTa-like: lm_head.dense), if it has one."""
    head, out = mlm_head(model), unwrap_peft(model).get_output_embeddings()
    for module in head.modules() if head is not None else ():
        if isinstance(module, torch.nn.Linear) and module is not out and module.in_features == module.out_features:
            return module
    return None


def _was_missing(model: torch.nn.Module, param: torch.nn.Parameter | None, missing: Sequence[str]) -> bool:
    """Whether ``param`` is among the checkpoint's missing weights (``HeadReport.missing``) under any of its
    names (a tied weight has several: BERT's cls.predictions.bias and cls.predictions.decoder.bias)."""
    names = {n for n, p in unwrap_peft(model).named_parameters(remove_duplicate=False) if p is param}
    return param is not None and bool(names & set(missing))


def bias_was_missing(model: torch.nn.Module, missing: Sequence[str]) -> bool:
    return _was_missing(model, output_bias(model), missing)


def transform_was_missing(model: torch.nn.Module, missing: Sequence[str]) -> bool:
    dense = square_transform(model)
    return _was_missing(model, dense.weight if dense is not None else None, missing)


def init_bias_from_labels(bias: torch.nn.Parameter, labels: torch.Tensor, smoothing: float = 0.5) -> None:
    """Set the output bias to the log of the smoothed frequency of each token among the masked labels, so the
    untrained head starts as the unigram model of the masked tokens instead of a uniform one over the vocabulary
    (common practice for a softmax output layer: its bias at the log prior of the classes)."""
    counts = torch.bincount(labels, minlength=bias.numel()).double() + smoothing
    with torch.no_grad():
        bias.copy_((counts / counts.sum()).log().to(bias.dtype))


# Root mean square of the transform's pre-activations at the identity start. Measured on the packaged encoder
# (benchmarks/head_warmup.py, held-out loss after 3 epochs): identity scales of 1, 4, 8 and 16 (rms 0.4, 1.5,
# 3.1 and 6.1) gave 6.149, 6.120, 6.092 and 6.115; the random start 6.227.
IDENTITY_RMS = 3.0


def init_transform_as_identity(dense: torch.nn.Linear, hidden: torch.Tensor) -> None:
    """Start a missing hidden-to-hidden projection at a scaled identity (bias 0), so that the untrained head
    scores each token by the dot product of the final hidden state with its tied embedding, as the encoder's own
    input embeddings do (the "logit lens": output embeddings applied to hidden states directly), instead of by a
    random projection. The scale brings the pre-activations of ``hidden`` (the cached states) to IDENTITY_RMS."""
    rms = float(hidden.float().pow(2).mean().sqrt())
    with torch.no_grad():
        dense.weight.copy_(torch.eye(dense.in_features, dtype=dense.weight.dtype) * (IDENTITY_RMS / max(rms, 1e-6)))
        if dense.bias is not None:
            dense.bias.zero_()


def warm_up_head(model: torch.nn.Module, seqs: PackedSequences, plan: MaskingPlan, *, sample_seqs: int,
                 heldout_share: float, max_epochs: int, learning_rate: float, batch_size: int,
                 min_improvement: float, seed: int, device: torch.device, autocast, progress: bool,
                 encode_batch_size: int = 16, should_stop: Callable[[], bool] = lambda: False,
                 missing: Sequence[str] = ()) -> WarmupResult | None:
    """Train the MLM head alone on cached encoder states; None if ``should_stop()`` ended the encoder pass.

    One window = one epoch over the training positions, ``batch_size`` positions an AdamW step; the held-out loss
    is measured before the first and after every window; stops once two windows in a row are flat
    (``flat_twice``), or after ``max_epochs``. The head of the lowest held-out loss is kept. Weights named in
    ``missing`` (the checkpoint lacked them) get a start better than random: the output bias at the log frequency
    of the training positions' labels, the hidden-to-hidden projection at a scaled identity.
    """
    head = mlm_head(model)
    if head is None:
        raise RuntimeError(f"no MLM head found on {type(model).__name__}: the head warm-up needs cls or lm_head")
    began = time.perf_counter()
    rows, n_heldout = sample_rows(len(seqs), sample_seqs, heldout_share, seed)
    states = cache_masked_states(model, seqs, plan, rows, seed=seed, batch_size=encode_batch_size, device=device,
                                 autocast=autocast, should_stop=should_stop)
    if states is None:
        return None
    encoded = time.perf_counter()
    held, train = states.subset(states.rows < n_heldout), states.subset(states.rows >= n_heldout)
    if bias_was_missing(model, missing):
        init_bias_from_labels(output_bias(model), train.labels)
    if transform_was_missing(model, missing):
        init_transform_as_identity(square_transform(model), train.hidden)
    names = set(head_parameter_names(model))
    params = dict(model.named_parameters())
    frozen = {n: p.requires_grad for n, p in params.items()}
    for name, param in params.items():
        param.requires_grad_(name in names)
    head_params = {n: p for n, p in params.items() if n in names}
    optimizer = torch.optim.AdamW(list(head_params.values()), lr=learning_rate, weight_decay=0.0,
                                  fused=device.type in ("cpu", "cuda"))
    g = torch.Generator().manual_seed(step_seed(seed, SALT, 2))
    eval_batch = max(batch_size, 1024)
    losses = [heldout_loss(head, held, eval_batch, device, autocast)]
    best = {n: p.detach().clone() for n, p in head_params.items()}
    train_losses: list[float] = []
    steps, converged, stopped = 0, False, False
    was_training = model.training
    model.eval()  # the head has no dropout; eval keeps any module that has one quiet
    bar = tqdm(range(max_epochs), desc="head warm-up", unit="epoch", disable=not progress)
    try:
        for _ in bar:
            order = torch.randperm(len(train.labels), generator=g)
            total = 0.0
            for start in range(0, len(order), batch_size):
                if should_stop():
                    stopped = True
                    break
                idx = order[start:start + batch_size]
                with autocast():
                    logits = head(train.hidden[idx].to(device))  # (b, V)
                loss = F.cross_entropy(logits.float(), train.labels[idx].to(device))
                loss.backward()
                optimizer.step()
                optimizer.zero_grad(set_to_none=True)
                total += float(loss.detach()) * len(idx)
                steps += 1
            if stopped:
                break
            train_losses.append(total / len(order))
            losses.append(heldout_loss(head, held, eval_batch, device, autocast))
            bar.set_postfix(heldout=f"{losses[-1]:.3f}")
            if losses[-1] <= min(losses[:-1]):
                best = {n: p.detach().clone() for n, p in head_params.items()}
            if flat_twice(losses, min_improvement):
                converged = True
                break
    finally:
        bar.close()
        with torch.no_grad():
            for name, param in head_params.items():
                param.copy_(best[name])
        for name, param in params.items():
            param.requires_grad_(frozen[name])
        model.train(was_training)
    return WarmupResult(losses, train_losses, steps, converged, stopped, len(train.labels), len(held.labels),
                        encoded - began, time.perf_counter() - encoded)
