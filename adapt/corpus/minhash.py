"""Our own MinHash over word n-grams and LSH banding, vectorised with numpy.

Shingles: a word n-gram's id is a random linear combination (mod 2^64) of its words' hashes, folded to its top 32
bits (see ``Shingler``). Signatures: k random permutations x -> a_i x + b_i (mod 2^32, odd a_i) of those ids; the
signature is the minimum of each over the document's shingles, and the share of equal entries of two signatures
estimates their Jaccard similarity with standard error sqrt(J(1-J)/k) <= 1/(2 sqrt(k)) (Broder 1997). The ids are
already hash values, so cheap linear permutations suffice; the tests compare the estimate with the exact value.

LSH: the k entries are cut into b bands of r rows; two documents become candidates when one band is identical, with
probability 1 - (1 - s^r)^b for Jaccard s (Leskovec, Rajaraman & Ullman, Mining of Massive Datasets, §3.4).
"""

from __future__ import annotations

import numpy as np

EMPTY = np.uint32(0xFFFFFFFF)
_BLOCK_COLS = 8192  # shingles hashed at a time: a (k, 8192) uint32 block stays cache-sized


def _word_byte_table() -> np.ndarray:
    table = np.zeros(256, dtype=bool)
    for ch in b"0123456789abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ_":
        table[ch] = True
    table[0x80:] = True  # bytes of non-ASCII UTF-8 characters (accented letters) belong to words
    return table


_WORD_BYTE = _word_byte_table()


class Shingler:
    """Word n-gram ids (uint64 values below 2^32), computed for many texts at once without a Python loop per word.

    A word is a run of ASCII letters, digits, underscore or non-ASCII characters in the lower-cased UTF-8 bytes.
    Word hashes are polynomial hashes sum_j c_j q^(j-start) mod 2^64 taken from prefix sums (q odd, hence invertible
    mod 2^64), then mixed; an n-gram's id is sum_j m_j h(w_j) mod 2^64 folded to its top 32 bits. A text shorter
    than n words gives one id for all its words.
    """

    def __init__(self, ngram_words: int, seed: int):
        rng = np.random.default_rng([seed, 1])
        self.n = ngram_words
        self.mult = rng.integers(1, 2**63, size=ngram_words, dtype=np.uint64) * np.uint64(2) + np.uint64(1)
        self.q = int(rng.integers(2**40, 2**62)) * 2 + 1
        self._pw = np.ones(1, dtype=np.uint64)
        self._ipw = np.ones(1, dtype=np.uint64)

    def _powers(self, size: int) -> tuple[np.ndarray, np.ndarray]:
        if self._pw.size < size:
            size = max(size, 2 * self._pw.size)
            self._pw = np.cumprod(np.r_[np.uint64(1), np.full(size - 1, self.q, dtype=np.uint64)], dtype=np.uint64)
            qinv = pow(self.q, -1, 2**64)
            self._ipw = np.cumprod(np.r_[np.uint64(1), np.full(size - 1, qinv, dtype=np.uint64)], dtype=np.uint64)
        return self._pw, self._ipw

    def word_hashes(self, texts: list[str]) -> tuple[np.ndarray, np.ndarray]:
        """(hash of every word, index of its text)."""
        parts = [t.lower().encode("utf-8") for t in texts]
        data = np.frombuffer(b"\n".join(parts), dtype=np.uint8)  # the separator is not a word byte
        if data.size == 0:
            return np.empty(0, np.uint64), np.empty(0, np.int64)
        w = _WORD_BYTE[data]
        starts = np.flatnonzero(w & ~np.r_[False, w[:-1]])
        ends = np.flatnonzero(w & ~np.r_[w[1:], False]) + 1
        pw, ipw = self._powers(data.size + 1)
        prefix = np.zeros(data.size + 1, dtype=np.uint64)
        np.cumsum(data * pw[:data.size], dtype=np.uint64, out=prefix[1:])
        h = (prefix[ends] - prefix[starts]) * ipw[starts]
        h ^= h >> np.uint64(31)  # mix so that the low bits depend on every byte too
        h *= np.uint64(0xBF58476D1CE4E5B9)
        h ^= h >> np.uint64(29)
        text_starts = np.cumsum([0] + [len(p) + 1 for p in parts[:-1]])
        return h, np.searchsorted(text_starts, starts, side="right") - 1

    def shingles(self, text: str) -> np.ndarray:
        """Distinct n-gram ids of one text, sorted."""
        ids, _ = self.batch_shingles([text])
        return np.unique(ids)

    def batch_shingles(self, texts: list[str]) -> tuple[np.ndarray, np.ndarray]:
        """(ids, index of the text of each id), grouped by text; repeats kept (they do not change a minimum)."""
        wh, doc_of_word = self.word_hashes(texts)
        if wh.size == 0:
            return np.empty(0, np.uint64), np.empty(0, np.int64)
        n = self.n
        ids_parts, doc_parts = [], []
        m = wh.size - n + 1
        if m > 0:
            acc = wh[:m] * self.mult[0]
            for j in range(1, n):
                acc += wh[j:j + m] * self.mult[j]
            inside = doc_of_word[:m] == doc_of_word[n - 1:]  # the n-gram does not cross into the next text
            ids_parts.append(acc[inside] >> np.uint64(32))
            doc_parts.append(doc_of_word[:m][inside])
        lengths = np.bincount(doc_of_word, minlength=len(texts))
        first_word = np.r_[0, np.cumsum(lengths)[:-1]]
        for d in np.flatnonzero((lengths > 0) & (lengths < n)):  # short texts: one id of all their words
            k = int(lengths[d])
            acc = (wh[first_word[d]:first_word[d] + k] * self.mult[:k]).sum(dtype=np.uint64)
            ids_parts.append(np.array([acc >> np.uint64(32)], dtype=np.uint64))
            doc_parts.append(np.array([d], dtype=np.int64))
        ids, doc_of = np.concatenate(ids_parts), np.concatenate(doc_parts)
        order = np.argsort(doc_of, kind="stable")
        return ids[order], doc_of[order]


class MinHasher:
    """k random permutations x -> (a_i x + b_i) mod 2^32 (odd a_i) of the 32-bit shingle ids.

    The shingle ids are already hash values, so these cheap permutations act on random-looking keys; the tests
    check the Jaccard estimate against the exact value (Broder 1997 standard error).
    """

    def __init__(self, num_hashes: int, ngram_words: int, seed: int):
        rng = np.random.default_rng([seed, 2])
        self.k = num_hashes
        self.a = (rng.integers(0, 2**31, size=(num_hashes, 1), dtype=np.uint32) * np.uint32(2) + np.uint32(1))
        self.b = rng.integers(0, 2**32, size=(num_hashes, 1), dtype=np.uint32)
        self.shingler = Shingler(ngram_words, seed)

    def signatures(self, texts: list[str]) -> np.ndarray:
        """(len(texts), k) uint32; a text without words gets all 0xFFFFFFFF (never a candidate)."""
        out = np.full((self.k, len(texts)), EMPTY, dtype=np.uint32)  # (k, N): reduce along contiguous rows
        ids, doc_of = self.shingler.batch_shingles(texts)
        x = ids.astype(np.uint32)
        buf = np.empty((self.k, _BLOCK_COLS), dtype=np.uint32)
        for lo in range(0, x.size, _BLOCK_COLS):
            xb = x[lo:lo + _BLOCK_COLS]
            h = buf[:, :xb.size]
            np.multiply(self.a, xb[None, :], out=h)  # (k, B), wraps mod 2^32
            np.add(h, self.b, out=h)
            d = doc_of[lo:lo + xb.size]
            seg = np.flatnonzero(np.r_[True, d[1:] != d[:-1]])
            docs = d[seg]
            out[:, docs] = np.minimum(out[:, docs], np.minimum.reduceat(h, seg, axis=1))
        return np.ascontiguousarray(out.T)


def estimated_jaccard(sig_a: np.ndarray, sig_b: np.ndarray) -> np.ndarray:
    """Share of equal entries, row by row (works for single signatures and (P, k) stacks)."""
    return (sig_a == sig_b).mean(axis=-1)


def band_keys(sigs: np.ndarray, bands: int) -> np.ndarray:
    """(N, bands) uint64 bucket keys: each band's rows combined with fixed odd multipliers (mod 2^64)."""
    n, k = sigs.shape
    rows = k // bands
    mult = (np.arange(1, rows + 1, dtype=np.uint64) * np.uint64(0x9E3779B97F4A7C15)) | np.uint64(1)
    s = sigs.astype(np.uint64).reshape(n, bands, rows)
    return (s * mult).sum(axis=2, dtype=np.uint64) ^ (s[:, :, 0] << np.uint64(32))


def candidate_pairs(sigs: np.ndarray, bands: int) -> np.ndarray:
    """(P, 2) int64 index pairs i < j sharing at least one band bucket.

    Within a bucket every member is paired with the bucket's first member and with its predecessor, so a bucket of
    s documents costs O(s) pairs instead of O(s^2); clusters stay connected through the verified pairs.
    """
    n = sigs.shape[0]
    valid = sigs[:, 0] != EMPTY
    keys = band_keys(sigs, bands)
    found = []
    for b in range(bands):
        idx = np.flatnonzero(valid)
        kb = keys[idx, b]
        order = np.argsort(kb, kind="stable")
        ks, members = kb[order], idx[order]
        same_as_prev = np.r_[False, ks[1:] == ks[:-1]]
        if not same_as_prev.any():
            continue
        group_start = np.maximum.accumulate(np.where(~same_as_prev, np.arange(ks.size), 0))
        first = members[group_start[same_as_prev]]
        prev = members[np.flatnonzero(same_as_prev) - 1]
        cur = members[same_as_prev]
        for other in (first, prev):
            lo, hi = np.minimum(other, cur), np.maximum(other, cur)
            found.append(lo.astype(np.int64) * n + hi)
    if not found:
        return np.empty((0, 2), dtype=np.int64)
    codes = np.unique(np.concatenate(found))
    codes = codes[codes // n != codes % n]
    return np.stack([codes // n, codes % n], axis=1)
