"""Pack token ids into fixed-length sequences, hold them (in memory or memory-mapped), and walk them in a
resumable order.

Packing rule (version ``PACKING_RULE``): documents are tokenised without special tokens, joined with the separator
token and cut into chunks of ``max_seq_len - 2`` tokens, each wrapped as ``[CLS] chunk [SEP]`` (common practice
for MLM pretraining; no padding is wasted except in the very last sequence). The rule streams: it needs only the
tokens of the current batch of documents and fewer than ``max_seq_len`` carried over from the one before.
"""

from __future__ import annotations

import numpy as np
import torch

from adapt.common.seeding import step_seed

# Bump when the packing rule changes: token caches written under another rule are then built again.
PACKING_RULE = 1


class SequencePacker:
    """The packing rule over a stream of documents: ``add`` token-id lists, get the full sequences so far;
    ``finish`` returns the padded last one."""

    def __init__(self, max_seq_len: int, cls_id: int, sep_id: int, pad_id: int):
        self.max_seq_len, self.cls_id, self.sep_id, self.pad_id = max_seq_len, cls_id, sep_id, pad_id
        self.body = max_seq_len - 2
        self._carry = np.zeros(0, dtype=np.int64)  # (< body,) tokens not yet in a sequence

    def add(self, docs: list[list[int]]) -> np.ndarray:
        """(n, T) int64 full sequences completed by these documents (n may be 0)."""
        stream: list[int] = []
        for ids in docs:
            if ids:
                stream.extend(ids)
                stream.append(self.sep_id)
        flat = np.concatenate([self._carry, np.asarray(stream, dtype=np.int64)])
        n = len(flat) // self.body
        rows = np.empty((n, self.max_seq_len), dtype=np.int64)
        rows[:, 0], rows[:, -1] = self.cls_id, self.sep_id
        rows[:, 1:-1] = flat[:n * self.body].reshape(n, self.body)
        self._carry = flat[n * self.body:]
        return rows

    def finish(self) -> tuple[np.ndarray, int]:
        """((0 or 1, T) int64, real tokens in it): the last, padded sequence if any tokens are left over."""
        k = len(self._carry)
        if k == 0:
            return np.zeros((0, self.max_seq_len), dtype=np.int64), 0
        row = np.full((1, self.max_seq_len), self.pad_id, dtype=np.int64)
        row[0, 0], row[0, 1:1 + k], row[0, 1 + k] = self.cls_id, self._carry, self.sep_id
        self._carry = self._carry[:0]
        return row, k + 2


class PackedSequences:
    """N packed sequences of T tokens: a (N, T) array of token ids, in memory or a read-only ``np.memmap`` of
    uint16/uint32. ``input_ids[rows]`` and ``attention_mask[rows]`` (rows: LongTensor, slice or int) give int64
    tensors, read from the array on demand. Only the last sequence can be padded: ``last_len`` tokens are real."""

    def __init__(self, tokens: np.ndarray, last_len: int, num_docs: int):
        if tokens.ndim != 2 or (len(tokens) and not 0 < last_len <= tokens.shape[1]):
            raise RuntimeError(f"packed sequences of shape {tokens.shape} cannot end with {last_len} real tokens")
        self.tokens, self.last_len, self.num_docs = tokens, last_len, num_docs
        self.input_ids = _Rows(self, self._ids)
        self.attention_mask = _Rows(self, self._mask)

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
    """Epoch-wise shuffled order over N sequences, sharded across processes, with a saveable position.

    Each epoch's permutation comes from a generator seeded by (seed, epoch), so the order after a resume is the
    same as in an uninterrupted run. Every process takes its own slice of each global batch.
    """

    def __init__(self, num_seqs: int, batch_size: int, seed: int, rank: int = 0, world_size: int = 1):
        if num_seqs < batch_size * world_size:
            raise RuntimeError(f"{num_seqs} sequences cannot fill one global batch of {batch_size * world_size}")
        self.num_seqs, self.batch_size, self.seed = num_seqs, batch_size, seed
        self.rank, self.world_size = rank, world_size
        self.epoch, self.position = 0, 0
        self._order = self._permutation(0)

    def _permutation(self, epoch: int) -> torch.Tensor:
        g = torch.Generator().manual_seed(step_seed(self.seed, epoch, 0xDA7A))
        return torch.randperm(self.num_seqs, generator=g)

    def next_indices(self) -> torch.Tensor:
        global_batch = self.batch_size * self.world_size
        if self.position + global_batch > self.num_seqs:  # drop the incomplete tail, start a new epoch
            self.epoch += 1
            self.position = 0
            self._order = self._permutation(self.epoch)
        start = self.position + self.rank * self.batch_size
        self.position += global_batch
        return self._order[start:start + self.batch_size]

    def state_dict(self) -> dict:
        return {"epoch": self.epoch, "position": self.position, "num_seqs": self.num_seqs,
                "batch_size": self.batch_size, "world_size": self.world_size, "seed": self.seed}

    def load_state_dict(self, state: dict) -> None:
        for key in ("num_seqs", "batch_size", "world_size", "seed"):
            if state[key] != getattr(self, key):
                raise RuntimeError(f"cannot resume the data order: {key} was {state[key]}, now {getattr(self, key)}")
        self.epoch, self.position = state["epoch"], state["position"]
        self._order = self._permutation(self.epoch)
