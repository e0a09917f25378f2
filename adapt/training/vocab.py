"""Vocabulary extension: domain words that the tokenizer cuts into several pieces become whole tokens.

- Words are the tokenizer's own words (its normaliser and pre-tokeniser, read from the fast tokenizer's word ids),
  so a chosen word is exactly what the extended tokenizer then matches.
- A word is ranked by the tokens it saves on the training text, count × (pieces − 1); a word that is split into
  many pieces inflates fertility (Rust et al. 2021), and adding frequent domain words to the vocabulary recovered
  most of the gain of domain pretraining in Sachidananda et al. 2021 (their method ranks by the divergence of
  domain and general subword-sequence frequencies, from memory; the tokens-saved rank with a domain/general ratio
  floor is ours).
- Names are kept out by two rules of ours, not by a published method: a word must appear in several documents, and
  a word that is nearly always capitalised inside a sentence is taken for a proper noun (a person, firm or place).
- The new words are added as whole-word tokens (``AddedToken(single_word=True)``: never matched inside a longer
  word), and each new embedding row starts at the mean of its pieces' rows (common practice for new tokens), so
  the model starts from what it already knew of the word; an MLM output bias, where there is one, likewise.
"""

from __future__ import annotations

import re
from collections import Counter
from dataclasses import dataclass, field
from typing import Iterable

import torch
from transformers import AddedToken, PreTrainedTokenizerBase

from adapt.common.errors import InputError
from adapt.config.vocab import WordRuleConfig

WORD_RE = re.compile(r"[^\W\d_]+(?:[-'’][^\W\d_]+)*", re.UNICODE)  # letters, with inner hyphens or apostrophes
MAX_DOC_CHARS = 200_000  # per document counted: a longer one adds little to word counts and costs memory
SENTENCE_OPENERS = frozenset('.!?:\n"(“')  # after one of these (spaces skipped) a word starts a sentence


@dataclass
class WordCounts:
    """Occurrences and document counts of every word of some text, with the pieces the tokenizer cut it into;
    ``inside`` counts the occurrences inside a sentence and ``capitalised`` those of them that start with a
    capital letter (the proper-noun rule)."""

    count: Counter
    docs: Counter
    pieces: dict[str, tuple[int, ...]]
    total_words: int = 0
    total_docs: int = 0
    inside: Counter = field(default_factory=Counter)
    capitalised: Counter = field(default_factory=Counter)

    def capitalised_share(self, word: str) -> float:
        """Share of the word's occurrences inside a sentence written with a capital; 0 for a word seen only at
        the start of sentences, where a capital says nothing."""
        if self.inside[word]:
            return self.capitalised[word] / self.inside[word]
        return 0.0


def require_wordpiece(tokenizer: PreTrainedTokenizerBase, setting: str) -> None:
    """Extension supports WordPiece tokenizers (the BERT family); other models match added words differently."""
    backend = getattr(tokenizer, "backend_tokenizer", None)
    kind = type(backend.model).__name__ if backend is not None else type(tokenizer).__name__
    if kind != "WordPiece":
        raise InputError(f"{setting}: its tokenizer is {kind}, and vocabulary extension supports WordPiece "
                         "tokenizers (BERT-family encoders) only; choose a BERT-family encoder or skip this job")


def count_words(tokenizer: PreTrainedTokenizerBase, batches: Iterable[list[str]], max_docs: int = 0,
                batch_docs: int = 64) -> WordCounts:
    """Count the tokenizer's words (normalised as it normalises them) over ``batches`` of documents."""
    normalize = tokenizer.backend_tokenizer.normalizer
    norm_cache: dict[str, str] = {}
    counts = WordCounts(Counter(), Counter(), {})
    for texts in batches:
        if max_docs:
            texts = texts[:max_docs - counts.total_docs]
        for lo in range(0, len(texts), batch_docs):
            batch = [t[:MAX_DOC_CHARS] for t in texts[lo:lo + batch_docs]]
            enc = tokenizer(batch, add_special_tokens=False, return_offsets_mapping=True, verbose=False)
            for i, text in enumerate(batch):
                seen = _count_document(text, enc["input_ids"][i], enc["offset_mapping"][i], enc.word_ids(i),
                                       counts, normalize, norm_cache)
                counts.docs.update(seen)
        counts.total_docs += len(texts)
        if max_docs and counts.total_docs >= max_docs:
            break
    return counts


def _count_document(text: str, ids: list[int], offsets: list[tuple[int, int]], word_ids: list[int | None],
                    counts: WordCounts, normalize, norm_cache: dict[str, str]) -> set[str]:
    seen: set[str] = set()
    start = 0
    while start < len(ids):
        end = start + 1
        while end < len(ids) and word_ids[end] is not None and word_ids[end] == word_ids[start]:
            end += 1
        surface = text[offsets[start][0]:offsets[end - 1][1]]
        word = norm_cache.get(surface)
        if word is None:
            word = norm_cache[surface] = normalize.normalize_str(surface) if normalize is not None else surface
        counts.count[word] += 1
        counts.total_words += 1
        if not _starts_sentence(text, offsets[start][0]):
            counts.inside[word] += 1
            counts.capitalised[word] += surface[:1].isupper()
        if word not in counts.pieces:
            counts.pieces[word] = tuple(ids[start:end])
        seen.add(word)
        start = end
    return seen


def _starts_sentence(text: str, at: int) -> bool:
    j = at - 1
    while j >= 0 and text[j] in " \t":
        j -= 1
    return j < 0 or text[j] in SENTENCE_OPENERS


@dataclass(frozen=True)
class ChosenWord:
    word: str
    count: int
    docs: int
    pieces: tuple[int, ...]
    domain_ratio: float | None

    @property
    def tokens_saved(self) -> int:
        return self.count * (len(self.pieces) - 1)


def domain_ratio(word: str, domain: WordCounts, general: WordCounts) -> float:
    """How many times more frequent ``word`` is per word of domain text than per word of general text (add-one)."""
    return ((domain.count[word] + 1) / max(domain.total_words, 1)) / \
        ((general.count[word] + 1) / max(general.total_words, 1))


def left_out_by(word: str, domain: WordCounts, rule: WordRuleConfig, known: set[str],
                general: WordCounts | None = None) -> str | None:
    """The first rule (its key under ``words.``) that keeps ``word`` out, or None if it may be added."""
    if word in known or len(domain.pieces[word]) < rule.min_pieces:
        return "min_pieces"
    checks = (("min_count", domain.count[word] < rule.min_count),
              ("min_docs", domain.docs[word] < rule.min_docs),
              ("min_chars", len(word) < rule.min_chars),
              ("letters_only", rule.letters_only and not WORD_RE.fullmatch(word)),
              ("max_capitalised_share", domain.capitalised_share(word) > rule.max_capitalised_share))
    failed = next((key for key, fails in checks if fails), None)
    if failed is None and general is not None and domain_ratio(word, domain, general) < rule.min_domain_ratio:
        failed = "min_domain_ratio"
    return failed


def choose_words(domain: WordCounts, rule: WordRuleConfig, known: set[str],
                 general: WordCounts | None = None) -> list[ChosenWord]:
    """The words to add, most tokens saved first (ties by the word); ``known``: the tokenizer's tokens."""
    chosen = [ChosenWord(word, count, domain.docs[word], domain.pieces[word],
                         domain_ratio(word, domain, general) if general is not None else None)
              for word, count in domain.count.items() if left_out_by(word, domain, rule, known, general) is None]
    chosen.sort(key=lambda c: (-c.tokens_saved, c.word))
    return chosen[:rule.max_new_tokens]


def split_words(domain: WordCounts, known: set[str]) -> list[str]:
    """The counted words the tokenizer cuts into pieces (the candidates of the rule)."""
    return [w for w in domain.count if w not in known and len(domain.pieces[w]) >= 2]


def rule_tally(domain: WordCounts, rule: WordRuleConfig, known: set[str],
               general: WordCounts | None = None) -> dict[str, int]:
    """How many of the words cut into pieces each rule kept out (the first rule each fails)."""
    tally = Counter(left_out_by(w, domain, rule, known, general) for w in split_words(domain, known))
    return {key: tally[key] for key in sorted(k for k in tally if k is not None)} | {"passed": tally[None]}


def extend_tokenizer(tokenizer: PreTrainedTokenizerBase, words: list[ChosenWord]) -> dict[str, int]:
    """Add ``words`` to ``tokenizer`` as whole-word tokens; returns each word's new id."""
    tokenizer.add_tokens([AddedToken(w.word, single_word=True, normalized=True) for w in words])
    ids = tokenizer.convert_tokens_to_ids([w.word for w in words])
    return dict(zip((w.word for w in words), ids))


@torch.no_grad()
def extend_embeddings(model: torch.nn.Module, words: list[ChosenWord], new_ids: dict[str, int]) -> None:
    """Give every new id an embedding row (and a row of a tied or untied output layer and its bias) that starts
    at the mean of the rows of the word's pieces. The matrices grow only as far as the new ids need: a model
    whose matrix already has rows beyond its tokenizer's last id (a vocabulary padded to a round size) keeps its
    size and the new ids take those unused rows."""
    rows_before = model.get_input_embeddings().weight.shape[0]
    needed = max(new_ids.values()) + 1
    if needed > rows_before:
        model.resize_token_embeddings(needed, mean_resizing=False)
    rows = model.get_input_embeddings().weight
    output = model.get_output_embeddings() if hasattr(model, "get_output_embeddings") else None
    untied = output is not None and output.weight.data_ptr() != rows.data_ptr()
    bias = getattr(output, "bias", None) if output is not None else None
    for w in words:
        new, pieces = new_ids[w.word], list(w.pieces)
        rows[new] = rows[pieces].mean(dim=0)
        if untied:
            output.weight[new] = output.weight[pieces].mean(dim=0)
        if bias is not None:
            bias[new] = bias[pieces].mean()
