"""Held-out split by duplicate cluster: every member of a cluster lands on the same side.

Splitting by document would let near-duplicates sit on both sides, so held-out loss would partly measure
memorisation (Lee et al. 2022 found train/test overlap inflating scores for this reason).
"""

from __future__ import annotations

import numpy as np


def assign_heldout(cluster_id: np.ndarray, keep: np.ndarray, heldout_share: float, seed: int) -> np.ndarray:
    """Boolean per document: True = held out. Whole clusters, drawn in a seeded random order, until the kept
    documents held out reach ``heldout_share``; with two or more clusters both sides get at least one."""
    heldout = np.zeros(cluster_id.size, dtype=bool)
    if not keep.any():
        return heldout
    sizes = np.bincount(cluster_id[keep])
    clusters = np.flatnonzero(sizes)
    order = np.random.default_rng([seed, 3]).permutation(clusters)
    target = heldout_share * int(keep.sum())
    cum = np.cumsum(sizes[order])
    n_take = int(np.searchsorted(cum, target, side="left")) + 1  # first prefix reaching the target
    if clusters.size >= 2:
        n_take = min(max(n_take, 1), clusters.size - 1)
    else:
        n_take = 0
    chosen = np.zeros(sizes.size, dtype=bool)
    chosen[order[:n_take]] = True
    heldout[:] = chosen[cluster_id] if sizes.size else False
    return heldout & keep
