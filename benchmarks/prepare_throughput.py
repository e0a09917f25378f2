"""Throughput and memory of the prepare stage, and near-duplicate recall of our MinHash + LSH vs datasketch.

Prints one JSON object. Synthetic documents (invented pseudo-words, Zipf-distributed) with planted exact and
near duplicates (2-5% of words replaced, or one sentence added) are generated with a fixed seed.

    .venv/bin/python benchmarks/prepare_throughput.py            # 10k documents
    .venv/bin/python benchmarks/prepare_throughput.py --large    # also 100k documents (a few minutes)
"""

from __future__ import annotations

import argparse
import json
import multiprocessing as mp
import os
import random
import resource
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

os.environ.setdefault("HF_HUB_OFFLINE", "1")
os.environ.setdefault("TOKENIZERS_PARALLELISM", "false")

SYLLABLES = ["ka", "lo", "ven", "tri", "mar", "el", "os", "qui", "dan", "ber", "ul", "ric", "sa", "to", "ne", "fin",
             "gra", "hol", "im", "pe", "rus", "ta", "wen", "zor", "ad", "bri", "cul", "dre", "est", "for"]


def make_vocab(rng: random.Random, size: int = 20_000) -> tuple[list[str], list[float]]:
    words = sorted({"".join(rng.choice(SYLLABLES) for _ in range(rng.randint(1, 4))) for _ in range(size * 2)})
    rng.shuffle(words)
    words = words[:size]
    weights = [1.0 / (rank + 1) for rank in range(len(words))]  # Zipf's law, exponent 1
    return words, weights


def make_doc(rng: random.Random, vocab: list[str], weights: list[float]) -> str:
    n_words = rng.randint(150, 300)
    words = rng.choices(vocab, weights=weights, k=n_words)
    out, i = [], 0
    while i < n_words:
        k = rng.randint(8, 20)
        sent = words[i:i + k]
        out.append(" ".join(sent).capitalize() + ".")
        i += k
    return " ".join(out)


def near_copy(rng: random.Random, text: str, vocab: list[str]) -> str:
    words = text.split()
    if rng.random() < 0.25:  # one sentence added
        extra = " ".join(rng.choice(vocab) for _ in range(rng.randint(10, 18))).capitalize() + "."
        pos = rng.randint(0, len(words))
        return " ".join(words[:pos] + extra.split() + words[pos:])
    share = rng.uniform(0.02, 0.05)
    for i in rng.sample(range(len(words)), max(1, round(share * len(words)))):
        words[i] = rng.choice(vocab)
    return " ".join(words)


def make_corpus(n_docs: int, seed: int = 0) -> tuple[list[str], list[tuple[int, int]], np.ndarray]:
    """Documents, planted (source, near copy) pairs, and the original each document was copied from (itself
    for originals): 8% near copies and 4% exact copies of earlier documents."""
    rng = random.Random(seed)
    vocab, weights = make_vocab(rng)
    docs: list[str] = []
    planted: list[tuple[int, int]] = []
    origin = np.arange(n_docs)
    for i in range(n_docs):
        r = rng.random()
        if i > 10 and r < 0.12:
            src = rng.randrange(i)
            origin[i] = origin[src]
            if r < 0.08:
                docs.append(near_copy(rng, docs[src], vocab))
                planted.append((src, i))
            else:
                docs.append(docs[src])
        else:
            docs.append(make_doc(rng, vocab, weights))
    return docs, planted, origin


def _components_recall(n: int, pairs: np.ndarray, planted: list[tuple[int, int]], origin: np.ndarray
                       ) -> tuple[float, int, int]:
    """(share of planted pairs ending in one cluster, verified pairs, verified pairs of unrelated documents)."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    g = coo_matrix((np.ones(len(pairs)), (pairs[:, 0], pairs[:, 1])), shape=(n, n)) if len(pairs) else \
        coo_matrix((n, n))
    _, labels = connected_components(g, directed=False)
    found = sum(labels[a] == labels[b] for a, b in planted)
    false = int((origin[pairs[:, 0]] != origin[pairs[:, 1]]).sum()) if len(pairs) else 0
    return found / len(planted), int(len(pairs)), false


def ours(docs: list[str], ngram: int, num_perm: int, bands: int, threshold: float, batch: int = 256) -> dict:
    from adapt.corpus.dedup import verified_pairs
    from adapt.corpus.minhash import MinHasher, candidate_pairs

    t0 = time.perf_counter()
    mh = MinHasher(num_perm, ngram, seed=0)
    sigs = np.vstack([mh.signatures(docs[i:i + batch]) for i in range(0, len(docs), batch)])
    t1 = time.perf_counter()
    pairs = verified_pairs(sigs, candidate_pairs(sigs, bands), threshold)
    t2 = time.perf_counter()
    return {"pairs": pairs, "signature_s": t1 - t0, "index_query_s": t2 - t1, "total_s": t2 - t0}


def theirs(docs: list[str], ngram: int, num_perm: int, threshold: float) -> dict:
    from datasketch import MinHash, MinHashLSH

    t0 = time.perf_counter()
    shingles = []
    for d in docs:
        w = d.lower().split()
        shingles.append([" ".join(w[i:i + ngram]).encode("utf-8") for i in range(max(1, len(w) - ngram + 1))])
    sigs = MinHash.bulk(shingles, num_perm=num_perm, seed=1)
    t1 = time.perf_counter()
    lsh = MinHashLSH(threshold=threshold, num_perm=num_perm)
    for i, m in enumerate(sigs):
        lsh.insert(i, m)
    pairs = []
    for i, m in enumerate(sigs):
        for j in lsh.query(m):
            if j > i and m.jaccard(sigs[j]) >= threshold:
                pairs.append((i, j))
    t2 = time.perf_counter()
    return {"pairs": np.array(pairs, dtype=np.int64).reshape(-1, 2), "signature_s": t1 - t0,
            "index_query_s": t2 - t1, "total_s": t2 - t0, "bands_rows": list(lsh.b and (lsh.b, lsh.r))}


def compare_dedup(docs: list[str], planted: list[tuple[int, int]], origin: np.ndarray, ngram: int = 3,
                  num_perm: int = 128,
                  bands: int = 32, threshold: float = 0.6) -> dict:
    out = {"docs": len(docs), "planted_near_pairs": len(planted), "ngram_words": ngram, "num_perm": num_perm,
           "threshold": threshold}
    for name, res in (("ours", ours(docs, ngram, num_perm, bands, threshold)),
                      ("datasketch", theirs(docs, ngram, num_perm, threshold))):
        recall, n_pairs, false = _components_recall(len(docs), res.pop("pairs"), planted, origin)
        out[name] = {"recall": round(float(recall), 4), "verified_pairs": n_pairs, "unrelated_pairs": false,
                     "docs_per_s": round(len(docs) / res["total_s"], 1),
                     **{k: (round(v, 3) if isinstance(v, float) else v) for k, v in res.items()}}
    out["ours"]["bands_rows"] = [bands, num_perm // bands]
    return out


def sweep(docs: list[str], planted: list[tuple[int, int]], origin: np.ndarray) -> list[dict]:
    """Recall of planted near-duplicates for shingle sizes and thresholds (our implementation)."""
    rows = []
    for ngram in (3, 5):
        for threshold in (0.5, 0.6, 0.7, 0.8):
            res = ours(docs, ngram, 128, 32, threshold)
            recall, n_pairs, false = _components_recall(len(docs), res["pairs"], planted, origin)
            rows.append({"ngram_words": ngram, "threshold": threshold, "recall": round(float(recall), 4),
                         "verified_pairs": n_pairs, "unrelated_pairs": false})
    return rows


def _prepare_child(folder: str, num_proc: int, queue: mp.Queue) -> None:
    from adapt.config.prepare import PrepareJob, PrepareRuntimeConfig
    from adapt.stages.prepare import run

    cfg = PrepareJob(inputs=[f"{folder}/in"], out_dir=f"{folder}/out", runtime=PrepareRuntimeConfig(progress=False, num_proc=num_proc))
    cfg.quality.gold_path = None  # heuristic score: no gold set is needed for synthetic text
    cfg.profile.general_path = None
    cfg.profile.sample_docs = 500
    t0 = time.perf_counter()
    result = run(cfg)
    seconds = time.perf_counter() - t0
    peak_kib = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss + resource.getrusage(
        resource.RUSAGE_CHILDREN).ru_maxrss * (num_proc > 1)
    queue.put({"seconds": round(seconds, 2), "peak_rss_mib": round(peak_kib / 1024, 1),
               "docs_kept": result["totals"]["docs_kept"], "duplicate_share": round(
                   result["duplicates"]["duplicate_share"], 4)})


def time_prepare(docs: list[str], num_proc: int = 1) -> dict:
    """Whole prepare stage in a fresh process (so its peak memory is its own), on docs written as jsonl."""
    with tempfile.TemporaryDirectory() as tmp:
        Path(tmp, "in").mkdir()
        with open(Path(tmp, "in", "docs.jsonl"), "w", encoding="utf-8") as fh:
            for i, d in enumerate(docs):
                fh.write(json.dumps({"id": f"d{i}", "text": d}) + "\n")
        queue: mp.Queue = mp.get_context("spawn").Queue()
        proc = mp.get_context("spawn").Process(target=_prepare_child, args=(tmp, num_proc, queue))
        proc.start()
        res = queue.get()
        proc.join()
    res["docs_per_s"] = round(len(docs) / res["seconds"], 1)
    res["num_proc"] = num_proc
    return res


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--large", action="store_true", help="also run 100k documents")
    ap.add_argument("--num-proc", type=int, default=1)
    args = ap.parse_args(argv)
    report: dict = {"cpu_count": os.cpu_count(), "python": sys.version.split()[0]}
    sizes = [10_000] + ([100_000] if args.large else [])
    for n in sizes:
        docs, planted, origin = make_corpus(n)
        entry = {"prepare": time_prepare(docs, args.num_proc),
                 "near_duplicates": compare_dedup(docs, planted, origin)}
        if n == 10_000:
            entry["shingle_threshold_sweep"] = sweep(docs, planted, origin)
        report[f"docs_{n}"] = entry
    print(json.dumps(report, indent=2))


if __name__ == "__main__":
    main()
