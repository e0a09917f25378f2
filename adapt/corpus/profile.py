"""Corpus measures for the profile: length histogram, tokenizer fertility, unigram overlap with general text.

- Fertility = subword tokens per whitespace-separated word (Rust et al. 2021); a value well above the one on
  general text suggests the vocabulary splits domain words into many pieces.
- Domain similarity = overlap of the most frequent unigrams, stop words left out (Gururangan et al. 2020 §3.1
  used the top 10K; from memory). When a side has fewer distinct words than asked for, the overlap is taken
  over the smaller list and the sizes are reported.
"""

from __future__ import annotations

import random
import re
from collections import Counter
from dataclasses import dataclass, field

import numpy as np

from adapt.corpus.stopwords import STOPWORDS

LENGTH_BINS = [0, 25, 50, 100, 200, 400, 800, 1600, 3200, 6400]
UNIGRAM_RE = re.compile(r"[^\W\d_]+(?:['’][^\W\d_]+)?", re.UNICODE)  # words with at least one letter
MAX_TOKENIZE_CHARS = 20_000  # per document: fertility is a rate, a long prefix measures it as well


def length_histogram(word_counts: np.ndarray) -> list[dict]:
    edges = LENGTH_BINS + [max(int(word_counts.max(initial=0)) + 1, LENGTH_BINS[-1] + 1)]
    counts, _ = np.histogram(word_counts, bins=edges)
    return [{"words_from": int(lo), "words_to": int(hi) - 1, "docs": int(c)}
            for lo, hi, c in zip(edges[:-1], edges[1:], counts)]


@dataclass
class TextSample:
    """Running unigram counts over every document added, and a seeded reservoir sample for the tokenizer."""

    language: str
    sample_docs: int
    seed: int
    unigrams: Counter = field(default_factory=Counter)
    sample: list[str] = field(default_factory=list)
    seen: int = 0

    def __post_init__(self) -> None:
        self._rng = random.Random(self.seed)
        self._stop = STOPWORDS[self.language]

    def add(self, text: str) -> None:
        self.unigrams.update(UNIGRAM_RE.findall(text.lower()))
        self.seen += 1
        if len(self.sample) < self.sample_docs:
            self.sample.append(text)
        else:  # reservoir sampling (Vitter's algorithm R)
            j = self._rng.randrange(self.seen)
            if j < self.sample_docs:
                self.sample[j] = text

    def top_words(self, n: int) -> list[str]:
        counts = ((w, c) for w, c in self.unigrams.items() if w not in self._stop)
        return [w for w, _ in sorted(counts, key=lambda wc: (-wc[1], wc[0]))[:n]]


def unigram_overlap(domain: TextSample, general: TextSample, top_n: int) -> dict:
    a, b = domain.top_words(top_n), general.top_words(top_n)
    size = min(len(a), len(b))
    shared = len(set(a[:size]) & set(b[:size])) if size else 0
    return {"top_n": top_n, "compared": size, "corpus_distinct_words": len(domain.unigrams),
            "general_distinct_words": len(general.unigrams), "shared": shared,
            "overlap": shared / size if size else None,
            "corpus_only_examples": [w for w in a[:200] if w not in set(b)][:15]}


def tokenizer_stats(tokenizer, texts: list[str], batch_docs: int = 64) -> dict:  # noqa: ANN001 - HF tokenizer
    """Fertility (tokens per word) and unknown-token rate of ``tokenizer`` on ``texts``."""
    tokens = words = unknown = 0
    unk = tokenizer.unk_token_id
    for lo in range(0, len(texts), batch_docs):
        batch = [t[:MAX_TOKENIZE_CHARS] for t in texts[lo:lo + batch_docs]]
        ids = tokenizer(batch, add_special_tokens=False, verbose=False)["input_ids"]
        for text, seq in zip(batch, ids):
            words += len(text.split())
            tokens += len(seq)
            if unk is not None:
                unknown += sum(1 for i in seq if i == unk)
    return {"docs": len(texts), "words": words, "tokens": tokens,
            "fertility": tokens / words if words else None,
            "unknown_rate": unknown / tokens if tokens else None}
