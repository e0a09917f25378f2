"""Tokenise and pack documents into fixed-length sequences, and walk them in a resumable order.

Packing: documents are tokenised without special tokens, joined with the separator token and cut into chunks of
``max_seq_len - 2`` tokens, each wrapped as ``[CLS] chunk [SEP]`` (common practice for MLM pretraining; no
padding is wasted except in the very last sequence).
"""

from __future__ import annotations

from dataclasses import dataclass

import torch
from tqdm.auto import tqdm
from transformers import PreTrainedTokenizerBase

from adapt.common.seeding import step_seed


@dataclass
class PackedSequences:
    input_ids: torch.Tensor  # (N, T) long
    attention_mask: torch.Tensor  # (N, T) long; 0 only in the padded tail of the last sequence
    num_docs: int

    def __len__(self) -> int:
        return self.input_ids.shape[0]

    @property
    def num_tokens(self) -> int:
        return int(self.attention_mask.sum())


def pack_documents(texts: list[str], tokenizer: PreTrainedTokenizerBase, max_seq_len: int,
                   progress: bool = False, chunk_docs: int = 512) -> PackedSequences:
    body = max_seq_len - 2
    stream: list[int] = []
    for start in tqdm(range(0, len(texts), chunk_docs), desc="tokenise", unit="chunk", disable=not progress):
        encoded = tokenizer(texts[start:start + chunk_docs], add_special_tokens=False)["input_ids"]
        for ids in encoded:
            if ids:
                stream.extend(ids)
                stream.append(tokenizer.sep_token_id)
    if not stream:
        return PackedSequences(torch.zeros((0, max_seq_len), dtype=torch.long),
                               torch.zeros((0, max_seq_len), dtype=torch.long), len(texts))
    n = (len(stream) + body - 1) // body
    ids = torch.full((n, max_seq_len), tokenizer.pad_token_id, dtype=torch.long)
    mask = torch.zeros((n, max_seq_len), dtype=torch.long)
    flat = torch.tensor(stream, dtype=torch.long)
    for i in range(n):
        chunk = flat[i * body:(i + 1) * body]
        ids[i, 0] = tokenizer.cls_token_id
        ids[i, 1:1 + len(chunk)] = chunk
        ids[i, 1 + len(chunk)] = tokenizer.sep_token_id
        mask[i, :2 + len(chunk)] = 1
    return PackedSequences(ids, mask, len(texts))


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
