"""Dynamic MLM masking as pure functions: an explicit torch.Generator in, tensors out.

Rule (Devlin et al. 2019, BERT §3.1): select ``rate`` of the non-special tokens; of those, ``mask_share`` become
the mask token, ``random_share`` a random token, and the rest stay unchanged. Labels are -100 except at selected
positions, so the loss only counts them.

Two selection units (``masking.unit``): ``token`` selects each token with probability ``rate``; ``word`` selects
whole words (all the pieces of a word or none; the whole-word-masking release of the original BERT code,
2019-05-31) until ``rate`` of a sequence's tokens are covered: the words are taken in a random order and a word
is kept while the tokens before it plus half its own stay below ``rate`` x the sequence's non-special tokens
(our midpoint rule: never more than half a word from the target, unbiased on average). The 80/10/10 split is then
drawn per token, as in that release.
"""

from __future__ import annotations

import torch

IGNORE_INDEX = -100


def mask_tokens(input_ids: torch.Tensor, special_mask: torch.Tensor, *, rate: float, mask_share: float,
                random_share: float, mask_token_id: int, random_ids: torch.Tensor,
                generator: torch.Generator, word_starts: torch.Tensor | None = None
                ) -> tuple[torch.Tensor, torch.Tensor]:
    """Return (masked input ids, labels) for a batch.

    input_ids, special_mask: (B, T); special_mask is True at special and padding positions, never selected.
    random_ids: 1-D tensor of token ids that random replacement draws from (normally all non-special ids).
    word_starts: (B, T) bool, True where a token begins a word: whole words are selected; None: single tokens.
    """
    if word_starts is None:
        selected = (torch.rand(input_ids.shape, generator=generator) < rate) & ~special_mask  # (B, T)
    else:
        selected = select_words(word_starts, special_mask, rate, generator)
    # (B, T) uniform draws decide the replacement kind, then the random token
    kind_draw = torch.rand(input_ids.shape, generator=generator)
    random_pick = torch.randint(len(random_ids), input_ids.shape, generator=generator)
    labels = torch.where(selected, input_ids, torch.full_like(input_ids, IGNORE_INDEX))
    to_mask = selected & (kind_draw < mask_share)
    to_random = selected & (kind_draw >= mask_share) & (kind_draw < mask_share + random_share)
    masked = input_ids.clone()
    masked[to_mask] = mask_token_id
    masked[to_random] = random_ids[random_pick[to_random]]
    return masked, labels


def word_groups(word_starts: torch.Tensor, special_mask: torch.Tensor) -> torch.Tensor:
    """(B, T) long: the word each position belongs to, numbered from 0 within its row. A special position is a
    word of its own, and so is a piece that follows one (a word cut at a sequence's start)."""
    after_special = torch.zeros_like(special_mask)
    after_special[:, 1:] = special_mask[:, :-1]
    starts = word_starts | special_mask | after_special
    starts[:, 0] = True
    return starts.long().cumsum(dim=1) - 1


def select_words(word_starts: torch.Tensor, special_mask: torch.Tensor, rate: float,
                 generator: torch.Generator) -> torch.Tensor:
    """(B, T) bool: the tokens of whole words, chosen in a random order until ``rate`` of each row's
    non-special tokens are covered (midpoint rule, module docstring)."""
    group = word_groups(word_starts, special_mask)  # (B, T)
    real = (~special_mask).to(torch.float64)
    length = torch.zeros(group.shape, dtype=torch.float64).scatter_add_(1, group, real)  # (B, G) tokens a word
    key = torch.rand(group.shape, generator=generator, dtype=torch.float64)  # (B, G) the random word order
    key = torch.where(length > 0, key, torch.full_like(key, 2.0))  # empty and special words go last
    order = torch.argsort(key, dim=1)
    ordered_length = length.gather(1, order)
    before = ordered_length.cumsum(dim=1) - ordered_length  # tokens of the words taken before each
    target = rate * real.sum(dim=1, keepdim=True)  # (B, 1)
    take_ordered = (before + ordered_length / 2 < target) & (ordered_length > 0)
    take = torch.zeros_like(take_ordered).scatter_(1, order, take_ordered)  # (B, G) back to word numbers
    return take.gather(1, group) & ~special_mask


def special_positions(input_ids: torch.Tensor, special_ids: list[int]) -> torch.Tensor:
    """(B, T) bool: True where the token is special (CLS, SEP, PAD, …) and must never be masked."""
    return torch.isin(input_ids, torch.tensor(sorted(special_ids), dtype=input_ids.dtype))


def replacement_ids(vocab_size: int, special_ids: list[int]) -> torch.Tensor:
    """Token ids a random replacement may use: the whole vocabulary except special tokens."""
    keep = torch.ones(vocab_size, dtype=torch.bool)
    keep[torch.tensor(sorted(special_ids), dtype=torch.long)] = False
    return torch.arange(vocab_size)[keep]
