"""MinHash accuracy, LSH candidates, duplicate clusters and the split by cluster."""

from __future__ import annotations

import random

import numpy as np
from datasketch import MinHash

from adapt.corpus.dedup import cluster_documents
from adapt.corpus.minhash import MinHasher, candidate_pairs, estimated_jaccard
from adapt.corpus.split import assign_heldout

VOCAB = [f"w{i}" for i in range(3000)]


def _doc(rng: random.Random, n: int = 200) -> list[str]:
    return [rng.choice(VOCAB) for _ in range(n)]


def _edit(rng: random.Random, words: list[str], n_changes: int) -> list[str]:
    out = list(words)
    for i in rng.sample(range(len(out)), n_changes):
        out[i] = rng.choice(VOCAB)
    return out


def _exact_jaccard(mh: MinHasher, a: str, b: str) -> float:
    sa, sb = mh.shingler.shingles(a), mh.shingler.shingles(b)
    return len(np.intersect1d(sa, sb)) / len(np.union1d(sa, sb))


def test_jaccard_estimate_within_three_standard_errors_of_exact():
    # Broder 1997: the share of equal MinHash entries is an unbiased estimate of the Jaccard similarity with
    # standard error sqrt(J(1-J)/k) <= 1/(2 sqrt(k)).
    rng = random.Random(0)
    k = 128
    mh = MinHasher(k, ngram_words=3, seed=7)
    z = []
    for _ in range(150):
        a = _doc(rng)
        b = _edit(rng, a, rng.randint(1, 80))
        ta, tb = " ".join(a), " ".join(b)
        exact = _exact_jaccard(mh, ta, tb)
        sig = mh.signatures([ta, tb])
        est = float(estimated_jaccard(sig[0], sig[1]))
        assert abs(est - exact) <= 3 / (2 * np.sqrt(k)), (est, exact)
        z.append((est - exact) / max(np.sqrt(exact * (1 - exact) / k), 1e-9))
    z = np.array(z)
    assert abs(z.mean()) < 0.3  # no bias: mean of 150 z-scores has standard error ~0.08
    assert 0.7 < z.std() < 1.3  # spread as the binomial model predicts
    assert (np.abs(z) > 3).sum() <= 2


def test_estimates_agree_with_datasketch_on_the_same_shingles():
    # Reference library: datasketch MinHash (same shingles, its own hash functions) estimates the same Jaccard.
    rng = random.Random(1)
    mh = MinHasher(256, ngram_words=3, seed=0)
    for _ in range(20):
        a = _doc(rng)
        b = _edit(rng, a, rng.randint(5, 60))
        ta, tb = " ".join(a), " ".join(b)
        ours = float(estimated_jaccard(*mh.signatures([ta, tb])))
        ref_a, ref_b = MinHash(num_perm=256, seed=1), MinHash(num_perm=256, seed=1)
        ref_a.update_batch([str(x).encode() for x in mh.shingler.shingles(ta)])
        ref_b.update_batch([str(x).encode() for x in mh.shingler.shingles(tb)])
        # both have standard error <= 1/(2*16) = 0.031 (Broder 1997): 4 joint SEs ~ 0.18
        assert abs(ours - ref_a.jaccard(ref_b)) < 0.18


def test_lsh_finds_planted_near_duplicates_and_verification_rejects_strangers():
    rng = random.Random(2)
    docs = [_doc(rng) for _ in range(300)]
    planted = []
    for i in range(40):  # 5% of the words changed: 3-gram Jaccard ~0.75 on 200 words
        planted.append((i, len(docs)))
        docs.append(_edit(rng, docs[i], 10))
    mh = MinHasher(128, ngram_words=3, seed=0)
    sigs = mh.signatures([" ".join(d) for d in docs])
    pairs = {tuple(p) for p in candidate_pairs(sigs, bands=32).tolist()}
    assert all(p in pairs for p in planted)  # 1 - (1 - 0.75^4)^32 > 0.9999 per pair (MMDS §3.4)
    clusters = cluster_documents(np.arange(len(docs), dtype=np.uint64), sigs, np.ones(len(docs)), bands=32,
                                 threshold=0.6)
    assert clusters.near_duplicates == 40 and clusters.exact_duplicates == 0
    assert all(clusters.cluster_id[a] == clusters.cluster_id[b] for a, b in planted)
    assert clusters.num_clusters == 300


def test_exact_duplicates_keep_the_best_quality_copy():
    hashes = np.array([5, 7, 5, 9, 5], dtype=np.uint64)
    quality = np.array([0.2, 0.9, 0.8, 0.5, 0.8])
    c = cluster_documents(hashes, None, quality, bands=1, threshold=0.8)
    assert c.exact_duplicates == 2 and c.num_clusters == 3
    assert c.keep.tolist() == [False, True, True, True, False]  # 0.8 beats 0.2; tie 0.8 -> earliest (index 2)
    assert c.exact_copy.tolist() == [True, False, False, False, True]


def test_no_near_duplicate_pair_straddles_the_split():
    rng = random.Random(3)
    docs = [_doc(rng, 120) for _ in range(200)]
    planted = []
    for _ in range(60):
        src = rng.randrange(len(docs))
        planted.append((src, len(docs)))
        docs.append(_edit(rng, docs[src], rng.randint(1, 5)))
    mh = MinHasher(128, ngram_words=3, seed=0)
    sigs = mh.signatures([" ".join(d) for d in docs])
    c = cluster_documents(np.arange(len(docs), dtype=np.uint64), sigs, np.ones(len(docs)), 32, 0.6, remove=False)
    held = assign_heldout(c.cluster_id, c.keep, 0.2, seed=0)
    assert 0.1 < held.mean() < 0.35 and held.any() and (~held).any()
    for a, b in planted:
        assert held[a] == held[b]
    # and for every pair whose exact Jaccard clears the threshold
    texts = [" ".join(d) for d in docs]
    for a, b in planted:
        if _exact_jaccard(mh, texts[a], texts[b]) >= 0.7:
            assert c.cluster_id[a] == c.cluster_id[b]


def test_split_is_seeded_and_keeps_both_sides_non_empty():
    cluster_id = np.array([0, 0, 1, 2, 3, 3, 4])
    keep = np.ones(7, dtype=bool)
    a = assign_heldout(cluster_id, keep, 0.3, seed=5)
    assert a.tolist() == assign_heldout(cluster_id, keep, 0.3, seed=5).tolist()
    assert a.any() and (~a).any()
    assert all(a[i] == a[j] for i in range(7) for j in range(7) if cluster_id[i] == cluster_id[j])
