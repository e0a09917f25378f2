"""The partitioned near-duplicate step (lsh_global) makes the same decisions as the one-array path (dedup.py).

The shuffle, the two-step join and the forest reduction are run here in plain Python over partitions, the way
engine_dask.py wires them on a cluster; the reference is dedup.cluster_documents on the whole corpus.
"""

from __future__ import annotations

import numpy as np
import pytest

from adapt.corpus import lsh_global as lg
from adapt.corpus.dedup import cluster_documents, clusters_from_labels
from adapt.corpus.minhash import EMPTY, MinHasher


def _corpus(seed: int, n_base: int = 150):
    """Texts with planted exact copies, near copies (chains of edits) and word-less texts."""
    rng = np.random.default_rng(seed)
    vocab = [f"w{i}" for i in range(400)]
    texts = [" ".join(rng.choice(vocab, size=60)) for _ in range(n_base)]
    for _ in range(60):
        src = texts[int(rng.integers(len(texts)))].split()
        for i in rng.choice(len(src), size=int(rng.integers(0, 5)), replace=False):
            src[i] = str(rng.choice(vocab))
        texts.insert(int(rng.integers(len(texts) + 1)), " ".join(src))
    texts[5] = texts[40] = "..."  # no words: never a near-duplicate candidate, but still an exact copy
    hashes = np.array([hash(t) & 0xFFFFFFFFFFFF for t in texts], dtype=np.uint64)
    quality = np.round(rng.random(len(texts)), 1)  # ties in quality: the earliest document wins
    return texts, hashes, quality


def _partitioned(sigs, hashes, sizes, bands, threshold, near=True, exact=True):
    offsets = np.cumsum([0] + sizes[:-1])
    bounds = np.r_[offsets, hashes.size]
    parts = [(sigs[o:o + s] if near else None, hashes[o:o + s]) for o, s in zip(offsets, sizes)]
    width = len(parts)
    routed = [lg.route_rows(p, int(o), bands, width, near, exact) for p, o in zip(parts, offsets)]
    reduced = [lg.bucket_pairs(*[rt[r] for rt in routed]) for r in range(width)]
    edges = [red[1] for red in reduced]
    n_cand = n_ver = 0
    if near:
        by_left = [lg.split_by_owner(red[0], bounds, 0) for red in reduced]
        left = [lg.split_left(lg.attach_left(parts[p], int(offsets[p]), *[b[p] for b in by_left]), bounds)
                for p in range(width)]
        verified = [lg.verify_right(parts[q], int(offsets[q]), threshold, *[lf[q] for lf in left])
                    for q in range(width)]
        edges += [v[0] for v in verified]
        n_cand, n_ver = sum(v[1] for v in verified), sum(len(v[0]) for v in verified)
    level = [lg.forest(e) for e in edges]
    while len(level) > 1:
        level = [lg.merge_forests(*level[i:i + 3]) for i in range(0, len(level), 3)]
    labels = lg.labels_from_forest(hashes.size, *level[0])
    return labels, n_cand, n_ver


@pytest.mark.parametrize("seed,sizes", [(0, [210]), (1, [1, 70, 64, 75]), (2, [33] * 6 + [12])])
@pytest.mark.parametrize("near,exact", [(True, True), (True, False), (False, True)])
def test_partitions_give_the_local_clusters(seed, sizes, near, exact):
    texts, hashes, quality = _corpus(seed)
    sizes = sizes[:-1] + [len(texts) - sum(sizes[:-1])]
    sigs = MinHasher(64, 3, seed).signatures(texts)
    assert (sigs[5] == EMPTY).all()
    bands, threshold = 16, 0.6
    ref = cluster_documents(hashes, sigs if near else None, quality, bands, threshold, exact=exact)
    labels, n_cand, n_ver = _partitioned(sigs, hashes, sizes, bands, threshold, near, exact)
    got = clusters_from_labels(labels, hashes, quality, exact, True, n_cand, n_ver)
    assert ref.num_clusters < len(texts)  # the planted copies are found, so the comparison means something
    np.testing.assert_array_equal(got.cluster_id, ref.cluster_id)
    np.testing.assert_array_equal(got.keep, ref.keep)
    np.testing.assert_array_equal(got.representative, ref.representative)
    np.testing.assert_array_equal(got.exact_copy, ref.exact_copy)
    assert (got.candidate_pairs, got.verified_pairs) == (ref.candidate_pairs, ref.verified_pairs)


def test_forest_roots_are_the_smallest_member():
    nodes, roots = lg.merge_forests(lg.forest(np.array([[7, 3], [9, 7]])), lg.forest(np.array([[3, 12], [20, 21]])))
    assert dict(zip(nodes.tolist(), roots.tolist())) == {3: 3, 7: 3, 9: 3, 12: 3, 20: 20, 21: 20}
