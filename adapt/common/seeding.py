"""Explicit randomness: every random draw takes a seed derived here or a ``torch.Generator``; nothing reads
the global RNG except dropout, which is re-seeded from ``step_seed`` before every forward pass."""

from __future__ import annotations

import hashlib


def step_seed(seed: int, *parts: int) -> int:
    """A 63-bit seed derived from the run seed and counters (step, micro-step, rank), stable across runs."""
    digest = hashlib.blake2b(repr((seed,) + tuple(parts)).encode(), digest_size=8).digest()
    return int.from_bytes(digest, "little") & ((1 << 63) - 1)
