"""Config schema of the vocab job: which domain words become whole tokens of the encoder's vocabulary."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Optional

from adapt.config.common import (EncoderConfig, RuntimeConfig, optional_str, validate_encoder,
                                 validate_out_dir_apart, validate_runtime)
from adapt.common.errors import Problems


@dataclass
class WordRuleConfig:
    # At most this many words are added, the ones that save the most tokens on the training split first.
    max_new_tokens: int = 1000
    # A word must occur at least min_count times in all and in at least min_docs different documents. The document
    # count keeps out words that belong to one case or one patient (names, places): the vocabulary ships with the
    # model and anyone can read it.
    min_count: int = 20
    min_docs: int = 5
    # Only words the tokenizer cuts into at least this many pieces (2 = every word not already one token).
    min_pieces: int = 2
    # Words shorter than this (in characters) are left alone.
    min_chars: int = 4
    # Only words made of letters (plus inner hyphens and apostrophes): no numbers, dates, codes or identifiers.
    letters_only: bool = True
    # Words written with a capital letter in more than this share of their occurrences inside a sentence are
    # taken for names (of people, firms, places) and left out; 1.0 turns the rule off. Text in lower case only
    # gives every word a share of 0, so there the rule finds nothing.
    max_capitalised_share: float = 0.9
    # With a general corpus: a word must be at least this many times more frequent (per word of text, add-one
    # smoothed) in the domain corpus than in general text, so that common words the tokenizer happens to split
    # are left to it.
    min_domain_ratio: float = 4.0


@dataclass
class VocabJob:
    # The encoder whose tokenizer is extended (a folder, a pretrain run folder, or packaged:all-minilm-l6-v2).
    encoder: EncoderConfig = field(default_factory=EncoderConfig)
    # Output folder of adapt-prepare on domain text: words are counted on its train/ split, and fertility is
    # measured before and after on train/ and heldout/.
    corpus: str = "???"
    # Output folder of adapt-prepare on general text (optional): enables words.min_domain_ratio and reports the
    # fertility on general text before and after.
    general: Optional[str] = None
    # Count words in at most this many training documents, taken in file order (0 = all).
    max_docs: int = 0
    out_dir: str = "runs/vocab"
    seed: int = 0
    words: WordRuleConfig = field(default_factory=WordRuleConfig)
    runtime: RuntimeConfig = field(default_factory=RuntimeConfig)


def validate(cfg: VocabJob, p: Problems, prefix: str = "") -> None:
    k = (prefix + ".") if prefix else ""
    validate_encoder(cfg.encoder, f"{k}encoder", p)
    validate_runtime(cfg.runtime, f"{k}runtime", p)
    p.check(cfg.corpus not in ("", "???"), f"{k}corpus is not set; pass {k}corpus=<output folder of adapt-prepare>")
    read = [d for d in (cfg.corpus, optional_str(cfg.general)) if d and d != "???"]
    validate_out_dir_apart(cfg.out_dir, read, k, p)  # the corpora are only read
    p.check(cfg.max_docs >= 0, f"{k}max_docs={cfg.max_docs} is negative; use 0 for all documents")
    w = cfg.words
    p.check(1 <= w.max_new_tokens <= 100_000,
            f"{k}words.max_new_tokens={w.max_new_tokens} is outside [1, 100000]; try {k}words.max_new_tokens=1000")
    p.check(w.min_count >= 1, f"{k}words.min_count={w.min_count} must be >= 1; try {k}words.min_count=20")
    p.check(w.min_docs >= 1, f"{k}words.min_docs={w.min_docs} must be >= 1; try {k}words.min_docs=5")
    p.check(w.min_pieces >= 2, f"{k}words.min_pieces={w.min_pieces} must be >= 2 (a word of one piece is already "
                               f"a token); try {k}words.min_pieces=2")
    p.check(w.min_chars >= 1, f"{k}words.min_chars={w.min_chars} must be >= 1; try {k}words.min_chars=4")
    p.check(0.0 <= w.max_capitalised_share <= 1.0, f"{k}words.max_capitalised_share={w.max_capitalised_share} is "
                                                   f"outside [0, 1]; try {k}words.max_capitalised_share=0.9")
    p.check(w.min_domain_ratio > 0, f"{k}words.min_domain_ratio={w.min_domain_ratio} must be > 0; "
                                    f"try {k}words.min_domain_ratio=4")
