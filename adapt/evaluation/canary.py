"""Memorisation audit with canaries: invented secrets planted in the training text, then ranked by the model.

- A canary is a sentence of ours with a random tag and a random six-digit secret, the digits written apart so
  that each is one token. Some canaries are planted (repeated r times in the training split), others, the
  controls, never are.
- A canary's score is the pseudo-log-likelihood of its secret tokens: each secret token masked on its own, the
  rest of the sentence visible (Salazar et al. 2020 define PLL this way over every token; here only the secret's).
- Exposure (Carlini et al. 2019, "The Secret Sharer", §4, from memory): exposure = log2 |R| − log2 rank, where R
  is the space of possible secrets and rank the secret's position when every member of R is scored. Scoring all
  10^6 secrets is too slow, so the rank is estimated from ``n`` secrets drawn at random: with r = 1 + the number of
  drawn secrets scoring at least as high (ties count against the secret), exposure ≈ log2(n + 1) − log2(r). Its
  largest value is log2(n + 1) (the secret ranks first); a secret the model knows nothing of has a uniform rank,
  so its expected exposure is about 1/ln 2 ≈ 1.44 bits.
"""

from __future__ import annotations

import math
import random
import string
from dataclasses import dataclass

import torch

from adapt.evaluation.pppl import position_log_probs

SECRET_DIGITS = 6
TEMPLATE = "the strongroom code for matter {tag} is {secret} ."


@dataclass(frozen=True)
class Canary:
    id: str
    tag: str
    secret: str  # digits separated by single spaces
    repeats: int  # 0 = a control: never planted

    @property
    def text(self) -> str:
        return canary_text(self.tag, self.secret)


def canary_text(tag: str, secret: str) -> str:
    return TEMPLATE.format(tag=tag, secret=secret)


def random_secret(rng: random.Random) -> str:
    return " ".join(rng.choice(string.digits) for _ in range(SECRET_DIGITS))


def _random_tag(rng: random.Random) -> str:
    return "".join(rng.choice(string.ascii_lowercase) for _ in range(6))


def make_canaries(repeats: list[int], per_repeat: int, controls: int, seed: int) -> list[Canary]:
    """``per_repeat`` canaries for each repeat count, and ``controls`` that are never planted; tags are distinct."""
    rng = random.Random(seed)
    counts = [r for r in repeats for _ in range(per_repeat)] + [0] * controls
    tags: set[str] = set()
    out = []
    for i, r in enumerate(counts):
        tag = _random_tag(rng)
        while tag in tags:
            tag = _random_tag(rng)
        tags.add(tag)
        out.append(Canary(f"canary-{i:03d}", tag, random_secret(rng), r))
    return out


def candidates(canary: Canary, n: int, seed: int) -> list[str]:
    """``n`` other secrets drawn uniformly from the ten-to-the-sixth space (never the canary's own)."""
    rng = random.Random(f"{seed}-{canary.id}")
    out = []
    while len(out) < n:
        s = random_secret(rng)
        if s != canary.secret:
            out.append(s)
    return out


def exposure(secret_score: float, candidate_scores: list[float]) -> dict:
    """The sampled exposure estimate and the rank it rests on (see the module docstring)."""
    rank = 1 + sum(1 for s in candidate_scores if s >= secret_score)
    n = len(candidate_scores)
    return {"rank": rank, "candidates": n, "exposure": math.log2(n + 1) - math.log2(rank),
            "max_exposure": math.log2(n + 1)}


def _secret_positions(tokenizer, text: str, start: int, end: int) -> tuple[list[int], list[int]]:
    enc = tokenizer(text, return_offsets_mapping=True)
    positions = [i for i, (a, b) in enumerate(enc["offset_mapping"]) if b > a and a >= start and b <= end]
    return enc["input_ids"], positions


def secret_scores(model: torch.nn.Module, tokenizer, tag: str, secrets: list[str], batch_size: int = 64) -> list[float]:
    """PLL of each secret's tokens in the canary sentence of ``tag`` (one masked copy per secret token)."""
    prefix = TEMPLATE.split("{secret}")[0].format(tag=tag)
    copies, owners, targets = [], [], []
    for k, secret in enumerate(secrets):
        text = canary_text(tag, secret)
        ids, positions = _secret_positions(tokenizer, text, len(prefix), len(prefix) + len(secret))
        for p in positions:
            masked = list(ids)
            masked[p] = tokenizer.mask_token_id
            copies.append((masked, p))
            owners.append(k)
            targets.append(ids[p])
    model.eval()
    totals = [0.0] * len(secrets)
    pad = tokenizer.pad_token_id or 0
    for lo in range(0, len(copies), batch_size):
        chunk = copies[lo:lo + batch_size]
        width = max(len(c) for c, _ in chunk)
        ids = torch.tensor([c + [pad] * (width - len(c)) for c, _ in chunk])
        attention = torch.tensor([[1] * len(c) + [0] * (width - len(c)) for c, _ in chunk])
        logp = position_log_probs(model, ids, attention, torch.tensor([p for _, p in chunk]),
                                  torch.tensor(targets[lo:lo + batch_size]))
        for j, value in enumerate(logp.tolist()):
            totals[owners[lo + j]] += value
    return totals
