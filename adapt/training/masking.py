"""Dynamic MLM masking as pure functions: an explicit torch.Generator in, tensors out.

Rule (Devlin et al. 2019, BERT §3.1): select ``rate`` of the non-special tokens; of those, ``mask_share`` become
the mask token, ``random_share`` a random token, and the rest stay unchanged. Labels are -100 except at selected
positions, so the loss only counts them.
"""

from __future__ import annotations

import torch

IGNORE_INDEX = -100


def mask_tokens(input_ids: torch.Tensor, special_mask: torch.Tensor, *, rate: float, mask_share: float,
                random_share: float, mask_token_id: int, random_ids: torch.Tensor,
                generator: torch.Generator) -> tuple[torch.Tensor, torch.Tensor]:
    """Return (masked input ids, labels) for a batch.

    input_ids, special_mask: (B, T); special_mask is True at special and padding positions, never selected.
    random_ids: 1-D tensor of token ids that random replacement draws from (normally all non-special ids).
    """
    # (B, T) uniform draws decide selection, then the replacement kind, then the random token
    selection_draw = torch.rand(input_ids.shape, generator=generator)
    kind_draw = torch.rand(input_ids.shape, generator=generator)
    random_pick = torch.randint(len(random_ids), input_ids.shape, generator=generator)

    selected = (selection_draw < rate) & ~special_mask
    labels = torch.where(selected, input_ids, torch.full_like(input_ids, IGNORE_INDEX))
    to_mask = selected & (kind_draw < mask_share)
    to_random = selected & (kind_draw >= mask_share) & (kind_draw < mask_share + random_share)
    masked = input_ids.clone()
    masked[to_mask] = mask_token_id
    masked[to_random] = random_ids[random_pick[to_random]]
    return masked, labels


def special_positions(input_ids: torch.Tensor, special_ids: list[int]) -> torch.Tensor:
    """(B, T) bool: True where the token is special (CLS, SEP, PAD, …) and must never be masked."""
    return torch.isin(input_ids, torch.tensor(sorted(special_ids), dtype=input_ids.dtype))


def replacement_ids(vocab_size: int, special_ids: list[int]) -> torch.Tensor:
    """Token ids a random replacement may use: the whole vocabulary except special tokens."""
    keep = torch.ones(vocab_size, dtype=torch.bool)
    keep[torch.tensor(sorted(special_ids), dtype=torch.long)] = False
    return torch.arange(vocab_size)[keep]
