"""Pack token ids into fixed-length sequences, hold them (in memory or memory-mapped), and walk them in a
resumable order.

Packing rule (version ``PACKING_RULE``): documents are tokenised without special tokens, joined with the separator
token and cut into chunks of ``max_seq_len - 2`` tokens, each wrapped as ``[CLS] chunk [SEP]`` (common practice
for MLM pretraining; no padding is wasted except in the very last sequence). The rule streams: it needs only the
tokens of the current batch of documents and fewer than ``max_seq_len`` carried over from the one before.

Beside the ids each sequence keeps what packing would otherwise lose: a word-start flag per token (from the fast
tokenizer's word ids; whole-word masking groups a word's pieces by it) and its quality, the token-weighted mean of
its documents' scores (a document's separator counts as its token; NaN when a document has no score).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import torch

from adapt.common.seeding import step_seed

# Bump when the packing rule changes: token caches written under another rule are then built again.
PACKING_RULE = 2  # 2: word-start flags and per-sequence quality beside the ids


class SequencePacker:
    """The packing rule over a stream of documents: ``add`` token-id lists (with their word-start flags and
    quality), get the full sequences so far; ``finish`` returns the padded last one. Both return ``Packed``."""

    def __init__(self, max_seq_len: int, cls_id: int, sep_id: int, pad_id: int):
        self.max_seq_len, self.cls_id, self.sep_id, self.pad_id = max_seq_len, cls_id, sep_id, pad_id
        self.body = max_seq_len - 2
        self._ids = np.zeros(0, dtype=np.int64)  # (< body,) tokens not yet in a sequence
        self._starts = np.zeros(0, dtype=np.uint8)  # their word-start flags
        self._quality = np.zeros(0, dtype=np.float64)  # their documents' scores

    def add(self, docs: list[list[int]], starts: list[list[int]] | None = None,
            quality: list[float | None] | None = None) -> Packed:
        """Full sequences completed by these documents (possibly none). ``starts``: per document, 1 where a
        token begins a word (None: every token does); ``quality``: per document its score (None: unknown)."""
        ids, flags, scores = [], [], []
        for i, doc in enumerate(docs):
            if doc:
                ids.extend(doc)
                ids.append(self.sep_id)
                flags.extend(starts[i] if starts is not None else [1] * len(doc))
                flags.append(1)
                q = quality[i] if quality is not None else None
                scores.extend([np.nan if q is None else float(q)] * (len(doc) + 1))
        flat = np.concatenate([self._ids, np.asarray(ids, dtype=np.int64)])
        flat_starts = np.concatenate([self._starts, np.asarray(flags, dtype=np.uint8)])
        flat_quality = np.concatenate([self._quality, np.asarray(scores, dtype=np.float64)])
        n = len(flat) // self.body
        cut = n * self.body
        rows = np.empty((n, self.max_seq_len), dtype=np.int64)
        rows[:, 0], rows[:, -1] = self.cls_id, self.sep_id
        rows[:, 1:-1] = flat[:cut].reshape(n, self.body)
        row_starts = np.ones((n, self.max_seq_len), dtype=np.uint8)
        row_starts[:, 1:-1] = flat_starts[:cut].reshape(n, self.body)
        row_quality = flat_quality[:cut].reshape(n, self.body).mean(axis=1) if n else np.zeros(0)
        self._ids, self._starts, self._quality = flat[cut:], flat_starts[cut:], flat_quality[cut:]
        return Packed(rows, row_starts, row_quality.astype(np.float32), self.max_seq_len)

    def finish(self) -> Packed:
        """The last, padded sequence if any tokens are left over (``real_len``: real tokens in it)."""
        k = len(self._ids)
        if k == 0:
            empty = np.zeros((0, self.max_seq_len), dtype=np.int64)
            return Packed(empty, empty.astype(np.uint8), np.zeros(0, dtype=np.float32), 0)
        row = np.full((1, self.max_seq_len), self.pad_id, dtype=np.int64)
        row[0, 0], row[0, 1:1 + k], row[0, 1 + k] = self.cls_id, self._ids, self.sep_id
        row_starts = np.ones((1, self.max_seq_len), dtype=np.uint8)
        row_starts[0, 1:1 + k] = self._starts
        quality = np.asarray([self._quality.mean()], dtype=np.float32)
        self._ids, self._starts, self._quality = self._ids[:0], self._starts[:0], self._quality[:0]
        return Packed(row, row_starts, quality, k + 2)


@dataclass
class Packed:
    """Sequences out of the packer: ids (n, T) int64, word-start flags (n, T) uint8 (1 at special tokens and
    padding too), quality (n,) float32, and the real tokens of the last row."""

    ids: np.ndarray
    starts: np.ndarray
    quality: np.ndarray
    real_len: int


class PackedSequences:
    """N packed sequences of T tokens: a (N, T) array of token ids, in memory or a read-only ``np.memmap`` of
    uint16/uint32. ``input_ids[rows]`` and ``attention_mask[rows]`` (rows: LongTensor, slice or int) give int64
    tensors, read from the array on demand; ``word_starts[rows]`` bool tensors (from a (N, T) uint8 array; None:
    every token starts a word). ``quality``: (N,) float32 score per sequence (None: unknown, all NaN). Only the
    last sequence can be padded: ``last_len`` tokens are real."""

    def __init__(self, tokens: np.ndarray, last_len: int, num_docs: int, starts: np.ndarray | None = None,
                 quality: np.ndarray | None = None):
        if tokens.ndim != 2 or (len(tokens) and not 0 < last_len <= tokens.shape[1]):
            raise RuntimeError(f"packed sequences of shape {tokens.shape} cannot end with {last_len} real tokens")
        if (starts is not None and starts.shape != tokens.shape) or (quality is not None and
                                                                     quality.shape != tokens.shape[:1]):
            raise RuntimeError(f"packed sequences of shape {tokens.shape} need word starts of the same shape and "
                               "one quality per sequence")
        self.tokens, self.last_len, self.num_docs = tokens, last_len, num_docs
        self.starts = starts if starts is not None else np.ones(tokens.shape, dtype=np.uint8)
        self.quality = quality if quality is not None else np.full(len(tokens), np.nan, dtype=np.float32)
        self.input_ids = _Rows(self, self._ids)
        self.attention_mask = _Rows(self, self._mask)
        self.word_starts = _Rows(self, self._starts)

    def __len__(self) -> int:
        return self.tokens.shape[0]

    @property
    def max_seq_len(self) -> int:
        return self.tokens.shape[1]

    @property
    def num_tokens(self) -> int:
        return (len(self) - 1) * self.max_seq_len + self.last_len if len(self) else 0

    def _ids(self, rows: np.ndarray) -> torch.Tensor:
        return torch.from_numpy(self.tokens[rows].astype(np.int64))  # (..., T)

    def _starts(self, rows: np.ndarray) -> torch.Tensor:
        return torch.from_numpy(self.starts[rows] != 0)  # (..., T) bool

    def _mask(self, rows: np.ndarray) -> torch.Tensor:
        real = np.where(rows == len(self) - 1, self.last_len, self.max_seq_len)
        return torch.from_numpy((np.arange(self.max_seq_len) < real[..., None]).astype(np.int64))  # (..., T)


class _Rows:
    """Indexable like a (N, T) tensor: a LongTensor of rows, a slice or an int."""

    def __init__(self, seqs: PackedSequences, read):
        self._seqs, self._read = seqs, read

    @property
    def shape(self) -> tuple[int, int]:
        return tuple(self._seqs.tokens.shape)

    def __len__(self) -> int:
        return len(self._seqs)

    def __getitem__(self, index) -> torch.Tensor:
        n = len(self._seqs)
        if isinstance(index, slice):
            return self._read(np.arange(*index.indices(n)))
        rows = np.asarray(index.cpu() if isinstance(index, torch.Tensor) else index)
        if rows.dtype.kind not in "iu":
            raise TypeError(f"packed sequences are indexed by integer rows, not {rows.dtype}")
        rows = np.where(rows < 0, rows + n, rows)
        if rows.size and (rows.min() < 0 or rows.max() >= n):
            raise IndexError(f"row index out of range for {n} packed sequences")
        return self._read(rows)


class BatchCursor:
    """Epoch-wise order over N sequences, sharded across processes, with a saveable position.

    ``order`` (data.order): ``shuffled``, a fresh permutation each epoch; ``quality_desc``, sequences from the
    highest quality down, shuffled within windows of ``window_batches`` global batches so that a batch still mixes
    sequences of nearby scores; ``quality_weighted``, N draws with replacement per epoch, each sequence drawn with
    weight max(quality, ``quality_floor``) (scores are in [0, 1]). Each epoch's order comes from a generator
    seeded by (seed, epoch, salt), so the order after a resume is the same as in an uninterrupted run. Every
    process takes its own slice of each global batch; ``next_indices(count)`` takes ``count`` rows per process
    (default ``batch_size``, the most any call takes).
    """

    def __init__(self, num_seqs: int, batch_size: int, seed: int, rank: int = 0, world_size: int = 1, *,
                 order: str = "shuffled", quality: np.ndarray | None = None, window_batches: int = 8,
                 quality_floor: float = 0.1, salt: int = 0xDA7A):
        if num_seqs < batch_size * world_size:
            raise RuntimeError(f"{num_seqs} sequences cannot fill one global batch of {batch_size * world_size}")
        if order != "shuffled" and (quality is None or len(quality) != num_seqs or not np.isfinite(quality).all()):
            raise RuntimeError(f"the {order} order needs a finite quality score for each of the {num_seqs} sequences")
        self.num_seqs, self.batch_size, self.seed = num_seqs, batch_size, seed
        self.rank, self.world_size = rank, world_size
        self.order, self.salt = order, salt
        self.window = window_batches * batch_size * world_size
        self.quality_floor = quality_floor
        self._quality = None if quality is None else torch.from_numpy(np.asarray(quality, dtype=np.float64))
        self.epoch, self.position = 0, 0
        self._order = self._permutation(0)

    def _permutation(self, epoch: int) -> torch.Tensor:
        g = torch.Generator().manual_seed(step_seed(self.seed, epoch, self.salt))
        if self.order == "quality_desc":
            best_first = torch.argsort(-self._quality, stable=True)
            window = torch.arange(self.num_seqs, dtype=torch.float64) // self.window
            return best_first[torch.argsort(window + torch.rand(self.num_seqs, generator=g, dtype=torch.float64))]
        if self.order == "quality_weighted":
            return torch.multinomial(sampling_weights(self._quality, self.quality_floor), self.num_seqs,
                                     replacement=True, generator=g)
        return torch.randperm(self.num_seqs, generator=g)

    def next_indices(self, count: int | None = None) -> torch.Tensor:
        count = self.batch_size if count is None else count
        global_batch = count * self.world_size
        if self.position + global_batch > self.num_seqs:  # drop the incomplete tail, start a new epoch
            self.epoch += 1
            self.position = 0
            self._order = self._permutation(self.epoch)
        start = self.position + self.rank * count
        self.position += global_batch
        return self._order[start:start + count]

    def state_dict(self) -> dict:
        return {"epoch": self.epoch, "position": self.position, "num_seqs": self.num_seqs,
                "batch_size": self.batch_size, "world_size": self.world_size, "seed": self.seed,
                "order": self.order}

    def load_state_dict(self, state: dict) -> None:
        for key in ("num_seqs", "batch_size", "world_size", "seed", "order"):
            saved = state.get(key, "shuffled") if key == "order" else state[key]  # older states: shuffled
            if saved != getattr(self, key):
                raise RuntimeError(f"cannot resume the data order: {key} was {saved}, now {getattr(self, key)}")
        self.epoch, self.position = state["epoch"], state["position"]
        self._order = self._permutation(self.epoch)


def sampling_weights(quality: torch.Tensor, quality_floor: float) -> torch.Tensor:
    """quality_weighted's draw weights: the score clipped to [quality_floor, 1], so no sequence is drawn less
    than quality_floor / max weight as often as the best."""
    return quality.clamp(min=quality_floor, max=1.0)


def replay_rows(share: float, batch_size: int, micro_index: int) -> int:
    """Rows of micro-batch ``micro_index`` (counted over the run) that come from the replay corpus: the
    difference of floor(share x batch_size x k) at k + 1 and k, so that the realised share after any k
    micro-batches is within 1 / (k x batch_size) of ``share`` while each batch keeps batch_size rows."""
    def total(k: int) -> int:
        return math.floor(round(k * share * batch_size, 9))
    return total(micro_index + 1) - total(micro_index)
