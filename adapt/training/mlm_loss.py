"""The MLM objective computed where it matters: the head runs only at masked positions.

The vocab-sized decoder over every position costs more than a small encoder itself (PITFALLS: MiniLM, 30522
outputs), so the loss module gathers the masked positions first; the encoder's last layer also runs at those positions
only where its architecture allows (``adapt.training.final_layer``). The loss stays inside the module's ``forward`` so
that wrappers for several processes (DDP) and autocast see it.
"""

from __future__ import annotations

import torch
import torch.nn.functional as F

from adapt.common.seeding import step_seed
from adapt.training.encoder import encoder_body, mlm_head
from adapt.training.final_layer import final_states_at
from adapt.training.masking import IGNORE_INDEX, mask_tokens, replacement_ids, special_positions
from adapt.training.packing import PackedSequences


class MaskedOnlyMlm(torch.nn.Module):
    """forward(input_ids, attention_mask, labels) -> mean cross-entropy over positions with a label.
    ``masked_final_layer=False`` runs the last layer everywhere (the same numbers; for speed comparisons)."""

    def __init__(self, model: torch.nn.Module, masked_final_layer: bool = True):
        super().__init__()
        self.model, self.masked_final_layer = model, masked_final_layer

    def forward(self, input_ids: torch.Tensor, attention_mask: torch.Tensor, labels: torch.Tensor,
                body_grad: bool = True) -> torch.Tensor:
        head = mlm_head(self.model)
        if head is None:  # unknown architecture: let the model compute its own loss over all positions
            return self.model(input_ids=input_ids, attention_mask=attention_mask, labels=labels).loss
        body, selected = encoder_body(self.model), labels != IGNORE_INDEX  # (B, T)
        if not bool(selected.any()):  # a zero that still reaches the decoder, so every step's gradients are dense
            selected = torch.zeros_like(selected)
            selected[0, 0] = True
            with torch.set_grad_enabled(body_grad and torch.is_grad_enabled()):
                return head(final_states_at(body, input_ids, attention_mask, selected)).sum() * 0.0
        with torch.set_grad_enabled(body_grad and torch.is_grad_enabled()):
            states = final_states_at(body, input_ids, attention_mask, selected, self.masked_final_layer)  # (M, H)
        logits = head(states)  # (M, V) for the M masked positions only
        return F.cross_entropy(logits.float(), labels[selected])


def sparse_tied_embedding_grad(model: torch.nn.Module) -> bool:
    """Let the input embedding send its gradient as sparse rows where it shares its weight with the MLM decoder.

    The tied weight gets two gradients a step: the decoder's, dense (vocabulary x hidden), and the lookup's, which
    touches only the rows of the batch's tokens. Dense, the lookup's costs a zeroed vocabulary-sized buffer and a
    vocabulary-sized sum every step (14% of a step of the packaged encoder on one AVX2 core); sparse, autograd
    adds those rows into the decoder's gradient. The weight's gradient stays dense and equal up to the order of
    float additions. Only where the weight trains and is tied (an untied embedding's gradient would be sparse
    alone, which AdamW refuses); call it after the model is wrapped for several processes, so that DDP does not
    expect a sparse gradient. Returns whether it was switched on."""
    lookup, decoder = model.get_input_embeddings(), model.get_output_embeddings()
    if not (isinstance(lookup, torch.nn.Embedding) and decoder is not None and lookup.weight is decoder.weight
            and lookup.weight.requires_grad and not lookup.max_norm):
        return False
    lookup.sparse = True
    return True


class MaskingPlan:
    """Everything masking needs from the tokenizer and config, bound once. ``unit``: ``token`` or ``word``
    (whole words, from the word-start flags the token cache keeps beside the ids)."""

    def __init__(self, tokenizer, rate: float, mask_share: float, random_share: float, unit: str = "token"):
        self.special_ids = sorted(set(tokenizer.all_special_ids))
        self.mask_token_id = tokenizer.mask_token_id
        self.random_ids = replacement_ids(len(tokenizer), self.special_ids)
        self.rate, self.mask_share, self.random_share, self.unit = rate, mask_share, random_share, unit

    def apply(self, input_ids: torch.Tensor, attention_mask: torch.Tensor, generator: torch.Generator,
              word_starts: torch.Tensor | None = None):
        """(masked ids, labels); ``word_starts`` (B, T) bool is needed when the unit is ``word``."""
        if self.unit == "word" and word_starts is None:
            raise RuntimeError("whole-word masking needs the word starts of the rows (PackedSequences.word_starts)")
        special = special_positions(input_ids, self.special_ids) | (attention_mask == 0)
        return mask_tokens(input_ids, special, rate=self.rate, mask_share=self.mask_share,
                           random_share=self.random_share, mask_token_id=self.mask_token_id,
                           random_ids=self.random_ids, generator=generator,
                           word_starts=word_starts if self.unit == "word" else None)

    def apply_rows(self, seqs: PackedSequences, rows, generator: torch.Generator):
        """(input ids, attention mask, masked ids, labels) of these rows of packed sequences."""
        ids, mask = seqs.input_ids[rows], seqs.attention_mask[rows]
        masked, labels = self.apply(ids, mask, generator, seqs.word_starts[rows])
        return ids, mask, masked, labels


class FixedMaskEval:
    """Held-out MLM loss with one mask drawn once, so numbers at different steps are comparable."""

    def __init__(self, seqs: PackedSequences, plan: MaskingPlan, seed: int, max_seqs: int, batch_size: int):
        n = min(len(seqs), max_seqs)
        g = torch.Generator().manual_seed(step_seed(seed, 0xE7A1))
        _, self.attention_mask, self.input_ids, self.labels = plan.apply_rows(seqs, slice(0, n), g)
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
