"""Near-duplicate clusters across partitions: the per-partition pieces of a global LSH band shuffle, a two-step
join that verifies candidate pairs where their signatures live, and a mergeable union-find (forest).

The decisions are those of ``minhash.candidate_pairs`` + ``dedup.cluster_documents`` on the whole corpus:
documents are numbered globally in input order; in every (band, key) bucket the members, sorted by that number,
are paired with the bucket's first member and with their predecessor; a pair is an edge when its estimated Jaccard
reaches the threshold; exact copies (same document hash) are edges without verification. Connected components of
those edges are the clusters. Only the parts a scheduler moves are here (pure numpy); engine_dask.py runs them.

A partition part is ``(sigs (n, k) uint32 or None, doc_hashes (n,) uint64)``, its first global number ``offset``.
"""

from __future__ import annotations

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

from adapt.corpus.minhash import EMPTY, band_keys, estimated_jaccard

_SPREAD = np.uint64(0x9E3779B97F4A7C15)  # odd multiplier spreading (band, key) over reducers (common practice)


def route_rows(part: tuple, offset: int, bands: int, reducers: int, near: bool, exact: bool) -> list[tuple]:
    """Map side of the shuffle: per reducer, (band rows (m, 3) uint64 [band, key, global number], exact rows
    (m, 2) uint64 [document hash, global number])."""
    sigs, hashes = part
    n = hashes.size
    number = np.arange(offset, offset + n, dtype=np.uint64)
    if near and sigs is not None and n:
        valid = np.flatnonzero(sigs[:, 0] != EMPTY)  # documents without words are never candidates
        keys = band_keys(sigs[valid], bands)  # (m, bands)
        rows = np.stack([np.repeat(np.arange(bands, dtype=np.uint64)[None, :], valid.size, 0).ravel(),
                         keys.ravel(), np.repeat(number[valid], bands)], axis=1)
    else:
        rows = np.empty((0, 3), np.uint64)
    ex = np.stack([hashes, number], axis=1) if exact else np.empty((0, 2), np.uint64)
    band_to = ((rows[:, 1] ^ (rows[:, 0] * _SPREAD)) * _SPREAD >> np.uint64(40)) % np.uint64(reducers)
    ex_to = (ex[:, 0] * _SPREAD >> np.uint64(40)) % np.uint64(reducers)
    return [(rows[band_to == r], ex[ex_to == r]) for r in range(reducers)]


def _bucket_edges(keys: np.ndarray, number: np.ndarray, with_first: bool) -> np.ndarray:
    """keys (m, c) and numbers sorted by (keys, number): pairs (earlier, later) of equal keys, each member with its
    predecessor and (with_first) with the first member of its bucket."""
    if number.size < 2:
        return np.empty((0, 2), np.int64)
    same = np.r_[False, (keys[1:] == keys[:-1]).all(axis=1)]
    if not same.any():
        return np.empty((0, 2), np.int64)
    cur = number[same]
    found = [np.stack([number[np.flatnonzero(same) - 1], cur], axis=1)]
    if with_first:
        start = np.maximum.accumulate(np.where(~same, np.arange(number.size), 0))
        found.append(np.stack([number[start[same]], cur], axis=1))
    return np.concatenate(found).astype(np.int64)


def bucket_pairs(*pieces: tuple) -> tuple[np.ndarray, np.ndarray]:
    """Reduce side: (candidate pairs (P, 2), exact-copy edges (E, 2)) of the rows routed to one reducer."""
    rows = np.concatenate([p[0] for p in pieces]) if pieces else np.empty((0, 3), np.uint64)
    ex = np.concatenate([p[1] for p in pieces]) if pieces else np.empty((0, 2), np.uint64)
    order = np.lexsort((rows[:, 2], rows[:, 1], rows[:, 0]))
    rows = rows[order]
    cand = _bucket_edges(rows[:, :2], rows[:, 2].astype(np.int64), with_first=True)
    order = np.lexsort((ex[:, 1], ex[:, 0]))
    ex = ex[order]
    return cand, _bucket_edges(ex[:, :1], ex[:, 1].astype(np.int64), with_first=False)


def split_by_owner(pairs: np.ndarray, bounds: np.ndarray, column: int) -> list[np.ndarray]:
    """Pairs per partition owning pairs[:, column]; ``bounds`` are the partitions' first numbers plus the total."""
    owner = np.searchsorted(bounds, pairs[:, column], side="right") - 1
    return [pairs[owner == p] for p in range(bounds.size - 1)]


def split_left(left: tuple[np.ndarray, np.ndarray], bounds: np.ndarray) -> list[tuple[np.ndarray, np.ndarray]]:
    """attach_left's output per partition owning the later document of each pair."""
    pairs, sigs = left
    owner = np.searchsorted(bounds, pairs[:, 1], side="right") - 1
    return [(pairs[owner == p], sigs[owner == p]) for p in range(bounds.size - 1)]


def attach_left(part: tuple, offset: int, *pair_lists: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """First join step, where the earlier documents live: distinct pairs with the earlier one's signature."""
    pairs = np.unique(np.concatenate(pair_lists), axis=0) if pair_lists else np.empty((0, 2), np.int64)
    return pairs, part[0][pairs[:, 0] - offset]


def verify_right(part: tuple, offset: int, threshold: float, *left: tuple) -> tuple[np.ndarray, int]:
    """Second join step, where the later documents live: (verified edges, candidate pairs seen)."""
    if not left:
        return np.empty((0, 2), np.int64), 0
    pairs = np.concatenate([p for p, _ in left])
    sig_a = np.concatenate([s for _, s in left])
    keep = estimated_jaccard(sig_a, part[0][pairs[:, 1] - offset]) >= threshold
    return pairs[keep], len(pairs)


def forest(*edge_lists: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Union-find result of some edges: (nodes, smallest node of each one's component), nodes sorted."""
    edges = np.concatenate(edge_lists) if edge_lists else np.empty((0, 2), np.int64)
    nodes, local = np.unique(edges, return_inverse=True)
    if nodes.size == 0:
        return nodes.astype(np.int64), nodes.astype(np.int64)
    local = local.reshape(-1, 2)
    graph = coo_matrix((np.ones(len(local), np.int8), (local[:, 0], local[:, 1])), shape=(nodes.size,) * 2)
    _, comp = connected_components(graph, directed=False)
    smallest = np.full(comp.max() + 1, np.iinfo(np.int64).max, np.int64)
    np.minimum.at(smallest, comp, nodes)  # nodes are sorted, so the first of a component is its smallest
    return nodes.astype(np.int64), smallest[comp]


def merge_forests(*forests: tuple[np.ndarray, np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    """Union of forests (a tree reduction step): each node linked to its component's smallest node."""
    return forest(*[np.stack([nodes, roots], axis=1) for nodes, roots in forests])


def labels_from_forest(n: int, nodes: np.ndarray, roots: np.ndarray) -> np.ndarray:
    """Component label of every document (its smallest member); documents in no edge are their own cluster."""
    labels = np.arange(n, dtype=np.int64)
    labels[nodes] = roots
    return labels
