"""The token cache: the same packed sequences as packing in memory, built once, rebuilt only when an input
changes, never used when torn."""

from __future__ import annotations

import json
import logging
import os
import random
import signal
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pytest
import torch
from transformers import BertTokenizerFast

from adapt.contracts.prepared_corpus import OUTPUT_SCHEMA, ShardWriter, read_texts
from adapt.training import token_cache
from adapt.training.packing import PackedSequences
from adapt.training.token_cache import (META, TOKENS, ensure_token_cache, load_packed, sampled_texts,
                                        open_token_cache, token_dtype)
from tests.conftest import TINY_WORDS, build_tiny_encoder

SAMPLES = Path(__file__).resolve().parents[2] / "corpora_samples"


def reference_pack(texts: list[str], tokenizer, max_seq_len: int, chunk_docs: int = 512):
    """The packing of adapt.training.packing.pack_documents as it was before the token cache (commit ce209ec),
    kept verbatim as the reference the cache must reproduce: (input_ids, attention_mask) as (N, T) int64."""
    body = max_seq_len - 2
    stream: list[int] = []
    for start in range(0, len(texts), chunk_docs):
        encoded = tokenizer(texts[start:start + chunk_docs], add_special_tokens=False)["input_ids"]
        for ids in encoded:
            if ids:
                stream.extend(ids)
                stream.append(tokenizer.sep_token_id)
    if not stream:
        return torch.zeros((0, max_seq_len), dtype=torch.long), torch.zeros((0, max_seq_len), dtype=torch.long)
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
    return ids, mask


def write_corpus(folder: Path, texts: list[str], shard_docs: int = 7, split: str = "train") -> Path:
    writer = ShardWriter(folder / split, OUTPUT_SCHEMA, shard_docs)
    for i, text in enumerate(texts):
        writer.add({"id": f"d{i}", "text": text, "source": "s", "quality": 1.0, "cluster_id": i,
                    "cluster_size": 1, "words": len(text.split())})
    writer.close()
    return folder


def random_texts(n: int, seed: int = 0) -> list[str]:
    rng = random.Random(seed)
    texts = [" ".join(rng.choice(TINY_WORDS) for _ in range(rng.randint(1, 40))) + "." for _ in range(n)]
    texts[3] = ""  # an empty document adds nothing, not even a separator
    texts[5] = "   "
    return texts


@pytest.fixture(scope="module")
def tiny_tok(tmp_path_factory) -> BertTokenizerFast:
    folder = build_tiny_encoder(tmp_path_factory.mktemp("tok") / "enc")
    return BertTokenizerFast.from_pretrained(folder)


def assert_same(seqs: PackedSequences, ids: torch.Tensor, mask: torch.Tensor) -> None:
    assert len(seqs) == len(ids)
    everything = torch.arange(len(seqs))
    assert torch.equal(seqs.input_ids[everything], ids)
    assert torch.equal(seqs.attention_mask[everything], mask)
    assert seqs.input_ids[everything].dtype == torch.long == seqs.attention_mask[everything].dtype
    assert seqs.num_tokens == int(mask.sum())


@pytest.mark.parametrize("max_seq_len", [8, 16, 64])
def test_cache_equals_packing_in_memory(tmp_path, tiny_tok, monkeypatch, max_seq_len):
    monkeypatch.setattr(token_cache, "TOKENIZE_BATCH_DOCS", 5)  # batches cut across documents and shards
    texts = random_texts(60)
    corpus = write_corpus(tmp_path / "corpus", texts)
    seqs = load_packed(corpus, "train", tiny_tok, max_seq_len, tmp_path / "cache")
    assert_same(seqs, *reference_pack(texts, tiny_tok, max_seq_len))
    assert seqs.num_docs == len(texts)
    assert isinstance(seqs.tokens, np.memmap) and not seqs.tokens.flags.writeable


def test_cache_equals_packing_on_the_samples(tmp_path):
    # the packaged encoder's tokenizer on the invented legal and clinical samples, several shards
    from adapt.config.common import EncoderConfig
    from adapt.training.encoder import load_tokenizer

    tok = load_tokenizer(EncoderConfig())
    docs = read_texts(SAMPLES / "legal") + read_texts(SAMPLES / "clinical")
    texts = [d["text"] for d in docs[::3]]  # every third document keeps the test quick
    corpus = write_corpus(tmp_path / "corpus", texts, shard_docs=100)
    seqs = load_packed(corpus, "train", tok, 128, tmp_path / "cache")
    assert len(seqs) > 100
    assert_same(seqs, *reference_pack(texts, tok, 128))


def test_a_stream_that_fills_the_last_sequence_exactly_has_no_padding(tmp_path, tiny_tok):
    # "court" is one token: 5 documents of 2 tokens + separator = 15 tokens = 5 bodies of 3 (max_seq_len 5)
    texts = ["court court"] * 5
    seqs = load_packed(write_corpus(tmp_path / "c", texts), "train", tiny_tok, 5, tmp_path / "cache")
    ids, mask = reference_pack(texts, tiny_tok, 5)
    assert len(ids) == 5 and bool(mask.all())
    assert_same(seqs, ids, mask)
    assert seqs.last_len == 5


def test_rows_index_like_a_tensor(tmp_path, tiny_tok):
    texts = random_texts(30)
    seqs = load_packed(write_corpus(tmp_path / "c", texts), "train", tiny_tok, 16, tmp_path / "cache")
    ids, mask = reference_pack(texts, tiny_tok, 16)
    rows = torch.tensor([len(ids) - 1, 0, 3, 3])
    assert torch.equal(seqs.input_ids[rows], ids[rows]) and torch.equal(seqs.attention_mask[rows], mask[rows])
    assert torch.equal(seqs.input_ids[:4], ids[:4]) and torch.equal(seqs.attention_mask[2:], mask[2:])
    assert torch.equal(seqs.input_ids[-1], ids[-1]) and torch.equal(seqs.attention_mask[-1], mask[-1])
    with pytest.raises(IndexError):
        seqs.input_ids[torch.tensor([len(ids)])]


def test_a_second_load_does_not_tokenise(tmp_path, tiny_tok, monkeypatch, caplog):
    corpus = write_corpus(tmp_path / "corpus", random_texts(40))
    first = load_packed(corpus, "train", tiny_tok, 16, tmp_path / "cache")

    def boom(*args, **kwargs):
        raise AssertionError("the tokenizer ran although the cache was complete")

    monkeypatch.setattr(type(tiny_tok), "__call__", boom)
    with caplog.at_level(logging.INFO, logger="adapt.training.token_cache"):
        second = load_packed(corpus, "train", tiny_tok, 16, tmp_path / "cache")
    assert "not tokenising again" in caplog.text
    everything = torch.arange(len(first))
    assert torch.equal(first.input_ids[everything], second.input_ids[everything])


def test_every_input_of_the_key_makes_a_new_cache(tmp_path, tiny_tok):
    root = tmp_path / "cache"
    texts = random_texts(40)
    corpus = write_corpus(tmp_path / "corpus", texts)
    base = ensure_token_cache(corpus, "train", tiny_tok, 16, root)
    assert ensure_token_cache(corpus, "train", tiny_tok, 16, root) == base
    assert ensure_token_cache(corpus, "train", tiny_tok, 32, root) != base
    extended = BertTokenizerFast.from_pretrained(tiny_tok.name_or_path)
    extended.add_tokens(["tenancy"])
    assert ensure_token_cache(corpus, "train", extended, 16, root) != base
    cased = BertTokenizerFast.from_pretrained(tiny_tok.name_or_path, do_lower_case=False)
    assert ensure_token_cache(corpus, "train", cased, 16, root) != base
    changed = write_corpus(tmp_path / "changed", texts[:-1] + [texts[-1] + " appeal"])
    assert ensure_token_cache(changed, "train", tiny_tok, 16, root) != base
    assert len({p.name for p in root.iterdir()}) == 5


KILLED_BUILD = textwrap.dedent("""
    import os, signal, sys
    from transformers import BertTokenizerFast
    from adapt.training import token_cache

    tok = BertTokenizerFast.from_pretrained(sys.argv[1])
    calls = []
    original = type(tok).__call__

    def tokenise_then_die(self, *args, **kwargs):
        calls.append(1)
        if len(calls) == 3:  # part of the token file is written: kill -9, no handler runs
            os.kill(os.getpid(), signal.SIGKILL)
        return original(self, *args, **kwargs)

    type(tok).__call__ = tokenise_then_die
    token_cache.TOKENIZE_BATCH_DOCS = 5
    token_cache.ensure_token_cache(sys.argv[2], "train", tok, 16, token_cache.Path(sys.argv[3]))
""")


def test_a_build_killed_half_way_is_not_used(tmp_path, tiny_tok):
    texts = random_texts(60)
    corpus = write_corpus(tmp_path / "corpus", texts)
    root = tmp_path / "cache"
    proc = subprocess.run([sys.executable, "-c", KILLED_BUILD, tiny_tok.name_or_path, str(corpus), str(root)],
                          capture_output=True, text=True, timeout=120, env={**os.environ, "HF_HUB_OFFLINE": "1"})
    assert proc.returncode == -signal.SIGKILL, proc.stderr[-1000:]
    (folder,) = root.iterdir()
    assert list(folder.glob(".tokens.bin.*.tmp")) and not (folder / META).exists(), "the kill left a torn temp file"
    with pytest.raises(RuntimeError, match="no complete token cache"):
        open_token_cache(folder)
    seqs = load_packed(corpus, "train", tiny_tok, 16, root)
    assert_same(seqs, *reference_pack(texts, tiny_tok, 16))
    assert not list(folder.glob(".*.tmp")), "the rebuild removes what the killed build left"


def test_a_token_file_of_the_wrong_size_is_rebuilt(tmp_path, tiny_tok, caplog):
    texts = random_texts(40)
    corpus = write_corpus(tmp_path / "corpus", texts)
    folder = ensure_token_cache(corpus, "train", tiny_tok, 16, tmp_path / "cache")
    tokens = folder / TOKENS
    tokens.write_bytes(tokens.read_bytes()[:-6])
    with caplog.at_level(logging.WARNING, logger="adapt.training.token_cache"):
        seqs = load_packed(corpus, "train", tiny_tok, 16, tmp_path / "cache")
    assert "building it again" in caplog.text
    assert_same(seqs, *reference_pack(texts, tiny_tok, 16))
    (folder / META).write_text("{\"record\": ")  # torn or foreign metadata: not a cache
    assert load_packed(corpus, "train", tiny_tok, 16, tmp_path / "cache").num_docs == len(texts)


def test_uint16_while_every_id_fits_else_uint32(tmp_path, tiny_tok):
    assert token_dtype(len(tiny_tok)) == np.uint16
    assert token_dtype(1 << 16) == np.uint16 and token_dtype((1 << 16) + 1) == np.uint32
    texts = random_texts(20)
    folder = ensure_token_cache(write_corpus(tmp_path / "c", texts), "train", tiny_tok, 16, tmp_path / "cache")
    meta = json.loads((folder / META).read_text())
    assert meta["dtype"] == "uint16" and (folder / TOKENS).stat().st_size == meta["num_seqs"] * 16 * 2


def test_a_vocabulary_beyond_65536_ids_is_stored_as_uint32(tmp_path):
    vocab = ["[PAD]", "[UNK]", "[CLS]", "[SEP]", "[MASK]"] + [f"w{i}" for i in range(70_000)]
    tok = BertTokenizerFast(vocab={t: i for i, t in enumerate(vocab)}, do_lower_case=True)
    texts = ["w69990 w3 w65536", "w1 w69999"]  # ids 69995, 8, 65541, 6, 70004: beyond uint16
    corpus = write_corpus(tmp_path / "c", texts)
    folder = ensure_token_cache(corpus, "train", tok, 8, tmp_path / "cache")
    assert json.loads((folder / META).read_text())["dtype"] == "uint32"
    seqs = open_token_cache(folder)
    assert_same(seqs, *reference_pack(texts, tok, 8))
    assert int(seqs.input_ids[torch.arange(len(seqs))].max()) == 70_004


def test_sampled_texts_are_the_seeded_random_documents_the_pppl_budget_scores(tmp_path, tiny_tok):
    from adapt.evaluation.pppl import _build_windows

    texts = random_texts(50)
    corpus = write_corpus(tmp_path / "corpus", texts, split="heldout")
    special = set(tiny_tok.all_special_ids)
    sizes = [sum(i not in special for i in ids) for ids in tiny_tok(texts, add_special_tokens=False)["input_ids"]]
    for seed in (0, 1):
        order = np.random.default_rng(seed).permutation(len(texts))  # the documented order, computed directly
        for budget in (1, 37, 200, 10_000):
            sample = sampled_texts(corpus, "heldout", tiny_tok, budget, seed)
            k = next((j + 1 for j in range(len(order)) if sum(sizes[i] for i in order[:j + 1]) >= budget),
                     len(order))
            assert sample == [texts[i] for i in order[:k]]
            scored = _build_windows(tiny_tok, sample, 16, budget)[0]
            assert sum(len(x) for x in scored.scored) == min(budget, sum(sizes))  # exactly the budget is scored
    assert sampled_texts(corpus, "heldout", tiny_tok, 200, 0) != sampled_texts(corpus, "heldout", tiny_tok, 200, 1)
    assert sampled_texts(corpus, "heldout", tiny_tok, 200, 0)[:3] != texts[:3]  # not the leading documents
    assert sampled_texts(corpus, "heldout", tiny_tok, 0, 0) == []


class _Rank:
    def __init__(self, main: bool):
        self.num_processes, self.is_main_process = 2, main


def test_a_failing_rank_0_still_reaches_the_broadcast_and_every_rank_fails_alike(tmp_path, tiny_tok, monkeypatch):
    import accelerate.utils

    from adapt.common.errors import InputError

    sent = []
    monkeypatch.setattr(accelerate.utils, "broadcast_object_list", lambda objs: sent.append(list(objs)) or objs)
    with pytest.raises(InputError, match="no train/ folder"):
        load_packed(tmp_path / "missing", "train", tiny_tok, 16, tmp_path / "cache", state=_Rank(main=True))
    folder, message, user_error = sent[0]  # what rank 0 sent the others instead of leaving them waiting
    assert folder is None and "no train/ folder" in message and user_error
    monkeypatch.setattr(accelerate.utils, "broadcast_object_list", lambda objs: sent[0])
    with pytest.raises(InputError, match="no train/ folder"):
        load_packed(tmp_path / "missing", "train", tiny_tok, 16, tmp_path / "cache", state=_Rank(main=False))


def test_other_ranks_map_the_folder_rank_0_built_without_tokenising(tmp_path, tiny_tok, monkeypatch):
    import accelerate.utils

    texts = random_texts(30)
    corpus = write_corpus(tmp_path / "corpus", texts)
    folder = ensure_token_cache(corpus, "train", tiny_tok, 16, tmp_path / "cache")
    expected = reference_pack(texts, tiny_tok, 16)
    monkeypatch.setattr(accelerate.utils, "broadcast_object_list", lambda objs: [str(folder), None, False])
    monkeypatch.setattr(type(tiny_tok), "__call__", lambda *a, **k: pytest.fail("rank 1 tokenised"))
    seqs = load_packed(tmp_path / "not-read", "train", tiny_tok, 16, tmp_path / "cache", state=_Rank(main=False))
    assert_same(seqs, *expected)


def test_a_full_disk_during_the_build_is_one_clear_error_and_leaves_no_cache(tmp_path, tiny_tok, monkeypatch):
    import errno

    from adapt.common.errors import InputError

    corpus = write_corpus(tmp_path / "corpus", random_texts(30))
    original = token_cache._write_rows

    def disk_full(*args):
        original(*args)
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(token_cache, "_write_rows", disk_full)
    with pytest.raises(InputError, match=r"data.cache_dir: cannot write .*No space left on device"):
        ensure_token_cache(corpus, "train", tiny_tok, 16, tmp_path / "cache")
    (folder,) = (tmp_path / "cache").iterdir()
    assert not (folder / META).exists() and not (folder / TOKENS).exists() and not list(folder.glob(".*.tmp"))


def test_the_cache_keeps_word_starts_and_a_token_weighted_quality_per_sequence(tmp_path, tiny_tok, monkeypatch):
    monkeypatch.setattr(token_cache, "TOKENIZE_BATCH_DOCS", 5)  # sequences span tokenizer batches and shards
    rng = random.Random(4)
    words = list(TINY_WORDS) + ["quartz", "ledger", "xylem"]  # the last three are cut into letter pieces
    texts = [" ".join(rng.choice(words) for _ in range(rng.randint(3, 25))) for _ in range(30)]
    scores = [round(rng.random(), 3) for _ in texts]
    writer = ShardWriter(tmp_path / "c" / "train", OUTPUT_SCHEMA, 7)
    for i, (text, q) in enumerate(zip(texts, scores)):
        writer.add({"id": f"d{i}", "text": text, "source": "s", "quality": q, "cluster_id": i, "cluster_size": 1,
                    "words": len(text.split())})
    writer.close()
    seqs = open_token_cache(ensure_token_cache(tmp_path / "c", "train", tiny_tok, 16, tmp_path / "cache"))
    # reference: the stream of (word start, document score) per token, as transformers' word_ids give it
    starts, quality = [], []
    for text, q in zip(texts, scores):
        ids = tiny_tok(text, add_special_tokens=False).word_ids()
        starts += [int(j == 0 or w != ids[j - 1]) for j, w in enumerate(ids)] + [1]
        quality += [q] * (len(ids) + 1)
    body = 14
    for row in range(len(seqs)):
        chunk = slice(row * body, (row + 1) * body)
        n = len(starts[chunk])
        assert seqs.word_starts[row][1:1 + n].long().tolist() == starts[chunk]
        assert seqs.word_starts[row][0] and seqs.word_starts[row][1 + n:].all()  # [CLS], [SEP], padding
        assert seqs.quality[row] == pytest.approx(np.mean(quality[chunk]), abs=1e-6)


def test_a_cache_without_the_word_start_file_is_built_again(tmp_path, tiny_tok, caplog):
    write_corpus(tmp_path / "c", random_texts(20))
    folder = ensure_token_cache(tmp_path / "c", "train", tiny_tok, 16, tmp_path / "cache")
    assert json.loads((folder / META).read_text())["record"]["packing_rule"] == 2
    (folder / "starts.bin").unlink()  # what a cache of the first packing rule lacks
    with caplog.at_level(logging.INFO, logger="adapt.training.token_cache"):
        again = ensure_token_cache(tmp_path / "c", "train", tiny_tok, 16, tmp_path / "cache")
    assert again == folder and "tokenised" in caplog.text and (folder / "starts.bin").exists()
