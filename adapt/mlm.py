"""The MLM objective computed where it matters: the head runs only at masked positions.

The vocab-sized decoder over every position costs more than a small encoder itself (PITFALLS: MiniLM, 30522
outputs), so the loss module gathers the masked positions first. The loss stays inside the module's ``forward`` so
that wrappers for several processes (DDP) and autocast see it.
"""

from __future__ import annotations

import logging

import torch
import torch.nn.functional as F
from tqdm.auto import tqdm

from adapt.adapters import unwrap_peft
from adapt.batches import BatchCursor, PackedSequences
from adapt.encoder import head_parameter_names
from adapt.masking import IGNORE_INDEX, mask_tokens, replacement_ids, special_positions, step_seed

log = logging.getLogger(__name__)


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


class MaskedOnlyMlm(torch.nn.Module):
    """forward(input_ids, attention_mask, labels) -> mean cross-entropy over positions with a label."""

    def __init__(self, model: torch.nn.Module):
        super().__init__()
        self.model = model

    def forward(self, input_ids: torch.Tensor, attention_mask: torch.Tensor, labels: torch.Tensor,
                body_grad: bool = True) -> torch.Tensor:
        head = mlm_head(self.model)
        if head is None:  # unknown architecture: let the model compute its own loss over all positions
            return self.model(input_ids=input_ids, attention_mask=attention_mask, labels=labels).loss
        with torch.set_grad_enabled(body_grad and torch.is_grad_enabled()):
            hidden = encoder_body(self.model)(input_ids=input_ids, attention_mask=attention_mask).last_hidden_state
        selected = labels != IGNORE_INDEX  # (B, T)
        if not bool(selected.any()):
            return hidden.sum() * 0.0
        logits = head(hidden[selected])  # (M, V) for the M masked positions only
        return F.cross_entropy(logits.float(), labels[selected])


class MaskingPlan:
    """Everything masking needs from the tokenizer and config, bound once."""

    def __init__(self, tokenizer, rate: float, mask_share: float, random_share: float):
        self.special_ids = sorted(set(tokenizer.all_special_ids))
        self.mask_token_id = tokenizer.mask_token_id
        self.random_ids = replacement_ids(len(tokenizer), self.special_ids)
        self.rate, self.mask_share, self.random_share = rate, mask_share, random_share

    def apply(self, input_ids: torch.Tensor, attention_mask: torch.Tensor, generator: torch.Generator):
        special = special_positions(input_ids, self.special_ids) | (attention_mask == 0)
        return mask_tokens(input_ids, special, rate=self.rate, mask_share=self.mask_share,
                           random_share=self.random_share, mask_token_id=self.mask_token_id,
                           random_ids=self.random_ids, generator=generator)


class FixedMaskEval:
    """Held-out MLM loss with one mask drawn once, so numbers at different steps are comparable."""

    def __init__(self, seqs: PackedSequences, plan: MaskingPlan, seed: int, max_seqs: int, batch_size: int):
        n = min(len(seqs), max_seqs)
        g = torch.Generator().manual_seed(step_seed(seed, 0xE7A1))
        self.input_ids, self.labels = plan.apply(seqs.input_ids[:n], seqs.attention_mask[:n], g)
        self.attention_mask = seqs.attention_mask[:n]
        self.batch_size = batch_size

    @property
    def num_masked(self) -> int:
        return int((self.labels != IGNORE_INDEX).sum())

    @torch.no_grad()
    def loss(self, loss_module: torch.nn.Module, device: torch.device, autocast) -> float:
        was_training = loss_module.training
        loss_module.eval()
        total, count = 0.0, 0
        for start in range(0, len(self.input_ids), self.batch_size):
            sl = slice(start, start + self.batch_size)
            n = int((self.labels[sl] != IGNORE_INDEX).sum())
            if n == 0:
                continue
            with autocast():
                loss = loss_module(self.input_ids[sl].to(device), self.attention_mask[sl].to(device),
                                   self.labels[sl].to(device))
            total += float(loss) * n
            count += n
        loss_module.train(was_training)
        return total / max(count, 1)


def warm_up_head(model: torch.nn.Module, seqs: PackedSequences, plan: MaskingPlan, *, steps: int,
                 learning_rate: float, batch_size: int, seed: int, device: torch.device, autocast,
                 progress: bool, min_improvement: float = 0.0, window_steps: int = 25) -> tuple[list[float], bool]:
    """Train the MLM head alone (encoder frozen, run without gradients); return (losses, converged).

    Stops early when the mean loss over the last ``window_steps`` improves on the window before by less than
    ``min_improvement`` (relative); ``converged`` says whether that happened before ``steps`` ran out.
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
        idx = cursor.next_indices()
        g = torch.Generator().manual_seed(step_seed(seed, 0x4EAD, step))
        ids, labels = plan.apply(seqs.input_ids[idx], seqs.attention_mask[idx], g)
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
