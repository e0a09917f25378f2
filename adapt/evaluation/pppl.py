"""Exact pseudo-perplexity of a masked-language model, and a bootstrap interval over documents.

PLL(W) = Σ_t log P(w_t | W without t), computed with one masked copy of the sequence per scored position;
pseudo-perplexity of a text set = exp(−ΣPLL / total scored tokens), a micro-average over tokens
(Salazar et al. 2020, "Masked Language Model Scoring", §2).

Variants:
- ``token``: each copy masks only the scored token (Salazar et al. 2020).
- ``word_l2r``: each copy also masks the later pieces of the scored token's word, so a word is not predicted from
  its own continuation (PLL-word-l2r, Kauf & Ivanova 2023). Words come from the fast tokenizer's ``word_ids()``.

Windows: a document is tokenised without special tokens. One that fits in ``max_seq_len − (number of special
tokens)`` = C tokens is one window. A longer one gets windows of C tokens starting at 0, S, 2S, … (the stride S,
half a window by default) while a window does not reach the end, then one window ending at the document's end;
each token is scored in the window that gives it the most context on its shorter side (ties: the earlier window),
so with S = C/2 every token has at least C/4 tokens of context on each side where the document allows, instead of
none at the edge of consecutive, non-overlapping chunks (S = C). Each window gets the tokenizer's own special
tokens around it (``[CLS] … [SEP]`` for BERT, ``<s> … </s>`` for RoBERTa); a token sees only its window.
Special tokens are never scored: neither the added ones nor any in the text itself (``[UNK]`` included); the
count of skipped in-text ones is reported.

Cost: the encoder body runs over the whole batch of masked copies, and the MLM head (the vocabulary projection
costs more than a small encoder's body) runs only at the one scored position of each copy.
"""

from __future__ import annotations

import logging
import time
from dataclasses import dataclass

import numpy as np
import torch
from tqdm.auto import tqdm
from transformers import PreTrainedModel, PreTrainedTokenizerBase

from adapt.config.score import VARIANTS
from adapt.common.errors import ConfigError
from adapt.common.runtime import autocast_context
from adapt.training.encoder import encoder_body, mlm_head
from adapt.training.final_layer import final_states_at

log = logging.getLogger(__name__)

_NO_WORD = -1  # word index of special and padding positions
_TOKENIZE_CHUNK_DOCS = 256


@dataclass
class DocScores:
    """Per-document results, in the order of the texts given; documents past a token budget are left out."""

    pll: np.ndarray       # (N,) float64: sum of natural-log probabilities of the scored tokens
    tokens: np.ndarray    # (N,) int64: scored tokens
    cut: np.ndarray       # (N,) bool: document shortened to stay within max_tokens
    variant: str
    skipped_special: int  # special tokens found inside the texts (e.g. [UNK]) and not scored
    n_windows: int
    seconds: float        # wall time of the forward passes
    window_stride: int = 0  # the stride used (document tokens between window starts)

    @property
    def total_tokens(self) -> int:
        return int(self.tokens.sum())


@dataclass
class _Windows:
    ids: torch.Tensor      # (W, Lmax) token ids, padded with the pad id
    word: torch.Tensor     # (W, Lmax) word index inside the document, _NO_WORD for special and padding
    lengths: torch.Tensor  # (W,)
    doc: np.ndarray        # (W,) document index
    scored: list[np.ndarray]  # per window: positions to score


def position_log_probs(model: PreTrainedModel, input_ids: torch.Tensor, attention_mask: torch.Tensor,
                       positions: torch.Tensor, targets: torch.Tensor, *, precision: str = "fp32",
                       masked_head_only: bool = True) -> torch.Tensor:
    """log P(targets[b] | input_ids[b]) at positions[b], as a (B,) float32 tensor.

    ``masked_head_only`` runs the MLM head (and, where the encoder allows it, its last layer) at the given positions
    only; otherwise (or when the model has no known head module) the full forward computes logits at every position.
    """
    head = mlm_head(model) if masked_head_only else None
    rows = torch.arange(input_ids.shape[0], device=input_ids.device)
    with torch.inference_mode(), autocast_context(precision, input_ids.device):
        if head is not None:  # the last layer, too, at the scored position only where the encoder allows it
            scored = torch.zeros_like(input_ids, dtype=torch.bool)
            scored[rows, positions] = True  # one position a row: final_states_at keeps the rows' order
            logits = head(final_states_at(encoder_body(model), input_ids, attention_mask, scored))  # (B, V)
        else:
            logits = model(input_ids=input_ids, attention_mask=attention_mask).logits[rows, positions]  # (B, V)
        logp = torch.log_softmax(logits.float(), dim=-1)  # fp32 even under autocast
    return logp[rows, targets]


def _special_frame(tokenizer: PreTrainedTokenizerBase) -> tuple[list[int], list[int]]:
    """The special ids the tokenizer puts before and after a single sequence (e.g. [CLS] / [SEP])."""
    enc = tokenizer("a", add_special_tokens=True, return_special_tokens_mask=True)
    ids, special = enc["input_ids"], enc["special_tokens_mask"]
    content = [i for i, s in enumerate(special) if not s]
    if not content:
        raise RuntimeError(f"{type(tokenizer).__name__}: cannot locate content tokens between special tokens")
    return ids[:content[0]], ids[content[-1] + 1:]


def _tokenize(tokenizer: PreTrainedTokenizerBase, texts: list[str]):
    """Yield (ids, word_ids) per text, without special tokens; word_ids None become _NO_WORD."""
    for start in range(0, len(texts), _TOKENIZE_CHUNK_DOCS):
        enc = tokenizer(texts[start:start + _TOKENIZE_CHUNK_DOCS], add_special_tokens=False)
        for i, ids in enumerate(enc["input_ids"]):
            yield ids, [_NO_WORD if w is None else w for w in enc.word_ids(i)]


def window_starts(n: int, capacity: int, stride: int) -> tuple[list[int], np.ndarray]:
    """(window starts, (n,) index of the window that scores each position) for an n-token document."""
    if n <= capacity:
        return [0], np.zeros(n, dtype=np.int64)
    starts = list(range(0, n - capacity, stride)) + [n - capacity]
    centre2 = 2 * np.asarray(starts) + capacity - 1  # twice each window's centre (integers)
    pos2 = 2 * np.arange(n)
    right = np.clip(np.searchsorted(centre2, pos2), 1, len(starts) - 1)
    # the window whose centre is nearest has the most context on the shorter side; ties go to the earlier one
    owner = np.where(pos2 - centre2[right - 1] <= centre2[right] - pos2, right - 1, right)
    return starts, owner.astype(np.int64)


def _build_windows(tokenizer: PreTrainedTokenizerBase, texts: list[str], max_seq_len: int,
                   max_tokens: int, window_stride: int = 0) -> tuple[_Windows, np.ndarray, int, int]:
    """Cut documents into windows; apply the token budget. Returns windows, per-doc cut flags, skipped specials
    and the stride used."""
    prefix, suffix = _special_frame(tokenizer)
    capacity = max_seq_len - len(prefix) - len(suffix)
    stride = min(window_stride, capacity) if window_stride else max(1, capacity // 2)
    special = set(tokenizer.all_special_ids)
    frame_word = [_NO_WORD] * len(prefix), [_NO_WORD] * len(suffix)
    rows, words, docs, scored, cut = [], [], [], [], []
    used = skipped = 0
    for d, (ids, wids) in enumerate(_tokenize(tokenizer, texts)):
        if max_tokens and used >= max_tokens:
            break
        ok = np.array([i not in special for i in ids], dtype=bool)
        skipped += int((~ok).sum())
        cut.append(False)
        if max_tokens and used + int(ok.sum()) > max_tokens:
            last = int(np.flatnonzero(ok)[max_tokens - used - 1])  # the budget's final scorable token
            ids, wids, ok, cut[-1] = ids[:last + 1], wids[:last + 1], ok[:last + 1], True
        used += int(ok.sum())
        starts, owner = window_starts(len(ids), capacity, stride)
        for k, s in enumerate(starts):
            mine = np.flatnonzero(ok & (owner == k))  # document positions this window scores
            if len(mine) == 0 and len(starts) > 1:
                continue  # a window between two others that scores nothing (small strides) is not built
            rows.append(prefix + ids[s:s + capacity] + suffix)
            words.append(frame_word[0] + wids[s:s + capacity] + frame_word[1])
            scored.append(len(prefix) + mine - s)
            docs.append(d)
    lengths = torch.tensor([len(r) for r in rows], dtype=torch.long)
    width = int(lengths.max()) if rows else 0
    pad = tokenizer.pad_token_id if tokenizer.pad_token_id is not None else 0
    ids_t = torch.full((len(rows), width), pad, dtype=torch.long)
    word_t = torch.full((len(rows), width), _NO_WORD, dtype=torch.long)
    for w, (r, wd) in enumerate(zip(rows, words)):
        ids_t[w, :len(r)] = torch.tensor(r)
        word_t[w, :len(wd)] = torch.tensor(wd)
    win = _Windows(ids_t, word_t, lengths, np.array(docs, dtype=np.int64), scored)
    return win, np.array(cut, dtype=bool), skipped, stride


def _check_seq_len(model: PreTrainedModel, tokenizer: PreTrainedTokenizerBase, max_seq_len: int) -> None:
    limits = [getattr(model.config, "max_position_embeddings", None)]
    embeddings = getattr(getattr(model, model.base_model_prefix, None), "embeddings", None)
    offset = getattr(embeddings, "padding_idx", None)  # RoBERTa-like: positions start after the padding index
    if limits[0] and isinstance(offset, int):
        limits[0] -= offset + 1
    if 0 < tokenizer.model_max_length < 1_000_000:  # tokenizers without a limit report a huge number
        limits.append(tokenizer.model_max_length)
    limit = min(x for x in limits if x) if any(limits) else None
    if limit is not None and max_seq_len > limit:
        raise ConfigError(f"encoder.max_seq_len={max_seq_len} exceeds what this encoder accepts ({limit}); "
                          f"try encoder.max_seq_len={min(limit, 512)}")
    frame = sum(len(x) for x in _special_frame(tokenizer))
    if max_seq_len <= frame:
        raise ConfigError(f"encoder.max_seq_len={max_seq_len} leaves no room beside {frame} special tokens; "
                          "try encoder.max_seq_len=128")


def _masked_batch(win: _Windows, w: torch.Tensor, t: torch.Tensor, variant: str, mask_id: int):
    """Masked copies for windows w at positions t: (ids, attention_mask, targets), each (B, L) or (B,)."""
    length = int(win.lengths[w].max())
    ids = win.ids[w, :length].clone()  # (B, L)
    ar = torch.arange(length)
    hide = ar[None, :] == t[:, None]  # (B, L)
    if variant == "word_l2r":
        word = win.word[w, :length]
        own = word.gather(1, t[:, None])  # (B, 1) word of the scored token
        hide |= (ar[None, :] > t[:, None]) & (word == own) & (own != _NO_WORD)
    targets = ids.gather(1, t[:, None]).squeeze(1)
    ids[hide] = mask_id
    attention = (ar[None, :] < win.lengths[w][:, None]).long()
    return ids, attention, targets


def _head_agrees(model: PreTrainedModel, ids, attention, t, targets) -> bool:
    """Guard for unfamiliar architectures: the head-at-mask shortcut must match the full forward."""
    a = position_log_probs(model, ids[:2], attention[:2], t[:2], targets[:2], masked_head_only=True)
    b = position_log_probs(model, ids[:2], attention[:2], t[:2], targets[:2], masked_head_only=False)
    return bool(torch.allclose(a, b, atol=1e-4, rtol=1e-4))


def score_documents(model: PreTrainedModel, tokenizer: PreTrainedTokenizerBase, texts: list[str], *,
                    max_seq_len: int, batch_size: int = 64, variant: str = "token", precision: str = "fp32",
                    progress: bool = False, max_tokens: int = 0, masked_head_only: bool = True,
                    window_stride: int = 0) -> DocScores:
    """Pseudo-log-likelihood of each text (see the module docstring for windows and variants).

    ``window_stride``: document tokens between the starts of a long document's windows (0 = half a window; the
    window's capacity or more = non-overlapping windows).

    ``max_tokens`` > 0 stops after that many scored tokens: the document crossing the budget is cut after its
    last token within budget and later documents are left out. The model is put in eval mode and restored.
    """
    if variant not in VARIANTS:
        raise ConfigError(f"variant={variant!r} is not one of {', '.join(VARIANTS)}; try variant=token")
    if tokenizer.mask_token_id is None:
        raise ConfigError(f"{type(tokenizer).__name__} has no mask token; pseudo-perplexity needs an MLM tokenizer")
    _check_seq_len(model, tokenizer, max_seq_len)
    win, cut, skipped, stride = _build_windows(tokenizer, list(texts), max_seq_len, max_tokens, window_stride)
    n_docs = len(cut)
    # Copies grouped by window, longest windows first, so batches need little padding.
    order = np.argsort(-win.lengths.numpy(), kind="stable").tolist()
    copy_w = torch.tensor([w for w in order for _ in win.scored[w]], dtype=torch.long)
    copy_t = torch.tensor([int(p) for w in order for p in win.scored[w]], dtype=torch.long)
    logp = np.zeros(len(copy_w), dtype=np.float64)
    device = next(model.parameters()).device
    was_training = model.training
    model.eval()
    started = time.perf_counter()
    try:
        use_head = masked_head_only and mlm_head(model) is not None
        if masked_head_only and not use_head:
            log.info("%s: no known MLM head module (cls, lm_head); scoring with the full forward (slower)",
                     type(model).__name__)
        with tqdm(total=len(copy_w), unit="tok", desc=f"pseudo-perplexity ({variant})",
                  disable=not progress) as bar:
            for s in range(0, len(copy_w), batch_size):
                w, t = copy_w[s:s + batch_size], copy_t[s:s + batch_size]
                ids, attention, targets = (x.to(device) for x in _masked_batch(win, w, t, variant,
                                                                                tokenizer.mask_token_id))
                t = t.to(device)
                if s == 0 and use_head and not _head_agrees(model, ids, attention, t, targets):
                    log.warning("%s: the MLM head applied at the masked position does not reproduce the full "
                                "forward; scoring with the full forward (slower)", type(model).__name__)
                    use_head = False
                lp = position_log_probs(model, ids, attention, t, targets, precision=precision,
                                        masked_head_only=use_head)
                logp[s:s + len(lp)] = lp.double().cpu().numpy()
                bar.update(len(lp))
    finally:
        model.train(was_training)
    seconds = time.perf_counter() - started
    pll = np.zeros(n_docs, dtype=np.float64)
    tokens = np.zeros(n_docs, dtype=np.int64)
    copy_doc = win.doc[copy_w.numpy()] if len(copy_w) else np.zeros(0, dtype=np.int64)
    np.add.at(pll, copy_doc, logp)
    np.add.at(tokens, copy_doc, 1)
    return DocScores(pll=pll, tokens=tokens, cut=cut, variant=variant, skipped_special=skipped,
                     n_windows=len(win.scored), seconds=seconds, window_stride=stride)


def pseudo_perplexity(scores: DocScores) -> float:
    """exp(−ΣPLL / Σ scored tokens) over all documents (micro-average over tokens)."""
    total = scores.total_tokens
    if total == 0:
        raise ValueError("no scored tokens: pseudo-perplexity is undefined")
    return float(np.exp(-scores.pll.sum() / total))


def bootstrap_ci(doc_pll: np.ndarray, doc_tokens: np.ndarray, bootstrap_resamples: int, seed: int,
                 confidence: float = 0.95) -> tuple[float, float]:
    """Percentile bootstrap interval of exp(−Σpll/Σtokens), resampling documents with replacement.

    Documents are the resampling unit because tokens of one document are not independent. Uses its own
    numpy Generator seeded with ``seed``.
    """
    pll = np.asarray(doc_pll, dtype=np.float64)
    tok = np.asarray(doc_tokens, dtype=np.float64)
    if pll.shape != tok.shape or pll.ndim != 1 or len(pll) == 0:
        raise ValueError(f"doc_pll and doc_tokens must be 1-D of equal, non-zero length (got {pll.shape}, "
                         f"{tok.shape})")
    if bootstrap_resamples < 1 or not 0 < confidence < 1:
        raise ValueError(f"need bootstrap_resamples >= 1 and 0 < confidence < 1 (got {bootstrap_resamples}, "
                         f"{confidence})")
    rng = np.random.default_rng(seed)
    n = len(pll)
    per_chunk = max(1, 2_000_000 // n)  # bounds the (resamples, n) index matrix to ~16 MB
    stats = []
    for done in range(0, bootstrap_resamples, per_chunk):
        idx = rng.integers(0, n, size=(min(per_chunk, bootstrap_resamples - done), n))
        with np.errstate(divide="ignore", invalid="ignore"):
            stats.append(np.exp(-pll[idx].sum(axis=1) / tok[idx].sum(axis=1)))
    values = np.concatenate(stats)
    alpha = (1.0 - confidence) / 2.0
    low, high = np.nanquantile(values, [alpha, 1.0 - alpha])
    return float(low), float(high)
