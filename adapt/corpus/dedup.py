"""Group documents into duplicate clusters (exact and near) and pick one document to keep per cluster.

Clusters are the connected components of the graph whose edges are exact-duplicate pairs and LSH candidate
pairs whose estimated Jaccard similarity reaches the threshold (the same partition a union-find over those
edges gives; scipy's connected_components does it in C).
"""

from __future__ import annotations

import logging
from dataclasses import dataclass

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

from adapt.corpus.minhash import candidate_pairs, estimated_jaccard

log = logging.getLogger(__name__)
_VERIFY_BATCH = 200_000


@dataclass
class Clusters:
    cluster_id: np.ndarray  # (N,) int64, 0..C-1
    keep: np.ndarray  # (N,) bool: the representative of each cluster (or every document when not removing)
    representative: np.ndarray  # (C,) index of the document kept for each cluster
    exact_copy: np.ndarray  # (N,) bool: not kept and an exact copy of another document (else a near duplicate)
    exact_duplicates: int  # documents that repeat an earlier text exactly
    near_duplicates: int  # further documents in a cluster beyond the exact ones
    candidate_pairs: int
    verified_pairs: int

    @property
    def num_clusters(self) -> int:
        return int(self.cluster_id.max()) + 1 if self.cluster_id.size else 0


def exact_pairs(doc_hashes: np.ndarray) -> np.ndarray:
    """(P, 2) pairs linking every later copy of a text to its first occurrence."""
    _, first, inverse = np.unique(doc_hashes, return_index=True, return_inverse=True)
    lead = first[inverse]
    dup = np.flatnonzero(lead != np.arange(doc_hashes.size))
    return np.stack([lead[dup], dup], axis=1).astype(np.int64)


def verified_pairs(sigs: np.ndarray, pairs: np.ndarray, threshold: float) -> np.ndarray:
    keep = np.zeros(len(pairs), dtype=bool)
    for lo in range(0, len(pairs), _VERIFY_BATCH):
        p = pairs[lo:lo + _VERIFY_BATCH]
        keep[lo:lo + len(p)] = estimated_jaccard(sigs[p[:, 0]], sigs[p[:, 1]]) >= threshold
    return pairs[keep]


def cluster_documents(doc_hashes: np.ndarray, sigs: np.ndarray | None, quality: np.ndarray, bands: int,
                      threshold: float, exact: bool = True, remove: bool = True) -> Clusters:
    """Cluster N documents; within a cluster keep the highest quality one (ties: the earliest)."""
    n = doc_hashes.size
    edges = [exact_pairs(doc_hashes)] if exact else []
    n_cand = n_ver = 0
    if sigs is not None and n > 1:
        cand = candidate_pairs(sigs, bands)
        ver = verified_pairs(sigs, cand, threshold)
        n_cand, n_ver = len(cand), len(ver)
        edges.append(ver)
        log.info("near duplicates: %d candidate pairs, %d verified at estimated Jaccard >= %.2f",
                 n_cand, n_ver, threshold)
    e = np.concatenate(edges) if edges else np.empty((0, 2), dtype=np.int64)
    graph = coo_matrix((np.ones(len(e), dtype=np.int8), (e[:, 0], e[:, 1])), shape=(n, n))
    _, labels = connected_components(graph, directed=False)
    return clusters_from_labels(labels, doc_hashes, quality, exact, remove, n_cand, n_ver)


def clusters_from_labels(labels: np.ndarray, doc_hashes: np.ndarray, quality: np.ndarray, exact: bool,
                         remove: bool, n_cand: int = 0, n_ver: int = 0) -> Clusters:
    """Clusters from any component labelling (equal label = same cluster): ids, kept documents, exact copies."""
    n = doc_hashes.size
    # Renumber clusters by first appearance so ids are stable and readable.
    _, first = np.unique(labels, return_index=True)
    rank = np.empty(first.size, dtype=np.int64)
    rank[np.argsort(first)] = np.arange(first.size)
    cluster_id = rank[np.unique(labels, return_inverse=True)[1]] if n else np.zeros(0, np.int64)
    order = np.lexsort((np.arange(n), -quality, cluster_id))
    is_first = np.r_[True, cluster_id[order][1:] != cluster_id[order][:-1]] if n else np.zeros(0, bool)
    rep = np.zeros(n, dtype=bool)
    rep[order[is_first]] = True
    representative = np.empty(first.size, dtype=np.int64)
    representative[cluster_id[rep]] = np.flatnonzero(rep)
    if exact:  # a later copy of a text, or a copy of the kept text, counts as exact; the rest as near
        _, first_seen, inverse = np.unique(doc_hashes, return_index=True, return_inverse=True)
        later_copy = first_seen[inverse] != np.arange(n)
        exact_copy = (later_copy | (doc_hashes == doc_hashes[representative[cluster_id]])) & ~rep
    else:
        exact_copy = np.zeros(n, dtype=bool)
    n_exact = int(exact_copy.sum())
    n_dup = n - first.size
    return Clusters(cluster_id, rep if remove else np.ones(n, dtype=bool), representative, exact_copy, n_exact,
                    n_dup - n_exact, n_cand, n_ver)
