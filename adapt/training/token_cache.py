"""The token cache: one split of a prepared corpus tokenised and packed once, on disk, memory-mapped by every
process at every start and resume.

``<root>/<split>-<key>/tokens.bin`` holds the packed sequences (adapt.training.packing) as a row-major (N, T)
array of uint16 (when every token id fits) or uint32, ``starts.bin`` their (N, T) uint8 word-start flags (from
the fast tokenizer's word ids) and ``quality.bin`` one float32 score per sequence; ``meta.json`` beside them
records the key's inputs, the shape and the file sizes. The key is a sha256 over the split's shard names, sizes and content hashes, the
tokenizer (vocabulary hash, full definition, special ids), ``max_seq_len`` and ``PACKING_RULE`` (2 since the
word starts and quality were added: older caches are built again, never misread): change any of
them and another cache is built next to the old one (delete the folder to reclaim the space).

Building streams shard by shard and batch by batch (only the ``text`` and ``quality`` columns are read, the fast tokenizer runs on
a batch of documents at a time), so memory stays flat however large the corpus. All files are written to a
temporary name, fsynced and renamed; ``meta.json`` goes last, so a folder without it, or whose token file has
another size, is never used (a build killed half way is simply built again). Builders of one key take a file lock.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import logging
from pathlib import Path
from typing import Iterator

import numpy as np
from tqdm.auto import tqdm

from adapt import __version__
from adapt.common.errors import InputError
from adapt.config.common import optional_str
from adapt.common.io import atomic_write_json, atomic_write_with, hash_file, now_utc, read_json
from adapt.contracts.prepared_corpus import count_rows, iter_scored_batches, iter_text_batches, split_shards
from adapt.training.encoder import vocab_sha256
from adapt.training.packing import PACKING_RULE, Packed, PackedSequences, SequencePacker

log = logging.getLogger(__name__)

CACHE_FOLDER = "token_cache"  # under out_dir when data.cache_dir is null
TOKENS, STARTS, QUALITY, META = "tokens.bin", "starts.bin", "quality.bin", "meta.json"
TOKENIZE_BATCH_DOCS = 1024  # documents per call of the fast tokenizer
_WHERE_FROM = ("name_or_path", "is_local", "local_files_only", "model_max_length")  # not how text is cut


def cache_root(out_dir: str | Path, cache_dir: str | None) -> Path:
    """``data.cache_dir``, or ``<out_dir>/token_cache`` when it is null."""
    cache_dir = optional_str(cache_dir)
    return Path(cache_dir) if cache_dir else Path(out_dir) / CACHE_FOLDER


def token_dtype(vocab_size: int) -> np.dtype:
    """uint16 when every id of the vocabulary fits (ids 0 .. vocab_size - 1), else uint32."""
    return np.dtype(np.uint16) if vocab_size <= 1 << 16 else np.dtype(np.uint32)


def tokenizer_record(tokenizer) -> dict:
    """What decides how a tokenizer cuts text: its vocabulary hash, a hash of its full definition (normaliser,
    pre-tokeniser, model, added tokens; fast tokenizers) and the special ids packing uses."""
    backend = getattr(tokenizer, "backend_tokenizer", None)
    if backend is not None:
        definition = json.loads(backend.to_str())
        for transient in ("truncation", "padding"):  # set per call, not part of how text is cut
            definition.pop(transient, None)
    else:  # a slow tokenizer: its plain settings (lower-casing, accents, ...), not where it was read from
        definition = {k: v for k, v in sorted(tokenizer.init_kwargs.items())
                      if isinstance(v, (bool, int, float, str)) and not k.endswith("_file") and k not in _WHERE_FROM}
    text = json.dumps(definition, ensure_ascii=False)  # keeps the library's own (fixed) key order
    return {"class": type(tokenizer).__name__, "vocab_size": len(tokenizer), "vocab_sha256": vocab_sha256(tokenizer),
            "definition_sha256": hashlib.sha256(text.encode("utf-8")).hexdigest(),
            "cls_id": tokenizer.cls_token_id, "sep_id": tokenizer.sep_token_id, "pad_id": tokenizer.pad_token_id}


def cache_record(shards: list[Path], tokenizer, max_seq_len: int) -> dict:
    """Everything the cached tokens depend on; its hash is the cache key."""
    return {"shards": [{"name": s.name, "bytes": s.stat().st_size, "sha256": hash_file(s)} for s in shards],
            "tokenizer": tokenizer_record(tokenizer), "max_seq_len": max_seq_len, "packing_rule": PACKING_RULE}


def cache_key(record: dict) -> str:
    return hashlib.sha256(json.dumps(record, sort_keys=True).encode("utf-8")).hexdigest()[:24]


def ensure_token_cache(corpus_dir: str | Path, split: str, tokenizer, max_seq_len: int, root: Path,
                       progress: bool = False) -> Path:
    """The cache folder of this split, tokenizer and length: found, or built now. Returns the folder."""
    for name in ("cls_token", "sep_token", "pad_token"):
        if getattr(tokenizer, name) is None:
            raise InputError(f"encoder.name_or_path: the tokenizer {tokenizer.name_or_path} has no {name}; packing "
                             "needs [CLS]/[SEP]/[PAD]-style tokens: give a masked-LM encoder's tokenizer")
    shards = split_shards(corpus_dir, split)
    record = cache_record(shards, tokenizer, max_seq_len)
    folder = Path(root) / f"{split}-{cache_key(record)}"
    meta = _valid_meta(folder, record)
    if meta is None:
        try:
            with _build_lock(folder):
                meta = _valid_meta(folder, record)  # another run may have built it while we waited
                if meta is None:
                    _build(folder, record, shards, tokenizer, max_seq_len, progress)
                    return folder
        except OSError as exc:  # read-only folder, full disk: the half-written temp file is already gone
            raise InputError(f"data.cache_dir: cannot write the token cache {folder} ({exc.strerror or exc}); "
                             "free some space or set data.cache_dir to a writable folder") from exc
    log.info("token cache %s: reusing %d packed sequences (%d tokens) of %s; not tokenising again",
             folder, meta["num_seqs"], meta["num_tokens"], split)
    return folder


def load_packed(corpus_dir: str | Path, split: str, tokenizer, max_seq_len: int, root: Path, *,
                progress: bool = False, state=None) -> PackedSequences:
    """The split's packed sequences, memory-mapped from the token cache. With several processes (``state``: an
    accelerate ``PartialState``), rank 0 finds or builds the cache while the others wait, then all map it."""
    if state is None or state.num_processes == 1:
        return open_token_cache(ensure_token_cache(corpus_dir, split, tokenizer, max_seq_len, root, progress))
    from accelerate.utils import broadcast_object_list

    folder, failure = None, None
    if state.is_main_process:
        try:
            folder = str(ensure_token_cache(corpus_dir, split, tokenizer, max_seq_len, root, progress))
        except BaseException as exc:  # still reach the broadcast, or the other ranks wait for ever
            failure = exc
    # sync point: the other processes wait here until rank 0 has the cache (or has failed)
    message = None if failure is None else str(failure) if isinstance(failure, InputError) else repr(failure)
    folder, message, user_error = broadcast_object_list([folder, message, isinstance(failure, InputError)])
    if failure is not None:
        raise failure
    if message is not None:
        raise InputError(message) if user_error else RuntimeError(f"rank 0 could not build the token cache: {message}")
    return open_token_cache(Path(folder))


def open_token_cache(folder: Path) -> PackedSequences:
    """Memory-map a complete cache folder read-only."""
    meta = _valid_meta(folder, None)
    if meta is None:
        raise RuntimeError(f"{folder}: no complete token cache; every process must see the folder rank 0 built "
                           "(put data.cache_dir or out_dir on a filesystem all nodes share)")
    shape = (meta["num_seqs"], meta["max_seq_len"])
    if shape[0] == 0:
        return PackedSequences(np.zeros(shape, dtype=meta["dtype"]), 0, meta["num_docs"])
    tokens = np.memmap(folder / TOKENS, dtype=meta["dtype"], mode="r", shape=shape)
    starts = np.memmap(folder / STARTS, dtype=np.uint8, mode="r", shape=shape)
    quality = np.fromfile(folder / QUALITY, dtype=np.float32)  # 4 bytes a sequence: read whole
    return PackedSequences(tokens, meta["last_len"], meta["num_docs"], starts, quality)


def _valid_meta(folder: Path, record: dict | None) -> dict | None:
    """meta.json of a complete cache (for ``record``, if given), or None."""
    try:
        meta = read_json(folder / META)
        sizes = {name: (folder / name).stat().st_size for name in (TOKENS, STARTS, QUALITY)}
        if record is not None and meta.get("record") != record:
            return None
        cells = meta["num_seqs"] * meta["max_seq_len"]
        expected = {TOKENS: cells * np.dtype(meta["dtype"]).itemsize, STARTS: cells, QUALITY: meta["num_seqs"] * 4}
    except (OSError, ValueError, KeyError, TypeError):  # missing, torn or foreign files: not a complete cache
        return None
    for name, size in sizes.items():
        if size != expected[name]:
            log.warning("token cache %s: %s has %d bytes, %d expected; building it again", folder, name, size,
                        expected[name])
            return None
    return meta


@contextlib.contextmanager
def _build_lock(folder: Path) -> Iterator[None]:
    """One builder per cache folder at a time, across processes and runs sharing data.cache_dir (POSIX)."""
    folder.mkdir(parents=True, exist_ok=True)
    try:
        import fcntl
    except ImportError:  # Windows: no lock; the atomic renames still keep a cache whole
        yield
        return
    with open(folder / ".lock", "w") as fh:
        fcntl.flock(fh, fcntl.LOCK_EX)
        try:
            yield
        finally:
            fcntl.flock(fh, fcntl.LOCK_UN)


def _build(folder: Path, record: dict, shards: list[Path], tokenizer, max_seq_len: int, progress: bool) -> None:
    for stale in folder.glob(".*.tmp"):  # left by a build that was killed; we hold the lock
        stale.unlink(missing_ok=True)
    (folder / META).unlink(missing_ok=True)  # the token file is about to change: the old record no longer holds
    dtype = token_dtype(len(tokenizer))
    packer = SequencePacker(max_seq_len, tokenizer.cls_token_id, tokenizer.sep_token_id, tokenizer.pad_token_id)
    counts = {"num_seqs": 0, "num_docs": 0, "last_len": max_seq_len}
    total_docs = count_rows(shards)
    quality: list[np.ndarray] = []  # 4 bytes a sequence: kept in memory, written after the tokens

    def write(tokens_tmp: Path, starts_tmp: Path) -> None:
        with open(tokens_tmp, "wb") as fh, open(starts_tmp, "wb") as fs, \
                tqdm(total=total_docs, desc=f"tokenise {folder.name.split('-')[0]}", unit="doc",
                     disable=not progress) as bar:
            for texts, scores in iter_scored_batches(shards, TOKENIZE_BATCH_DOCS):
                encoded = tokenizer(texts, add_special_tokens=False, return_attention_mask=False,
                                    return_token_type_ids=False)
                _write_rows(fh, fs, quality, packer.add(encoded["input_ids"], word_starts(encoded), scores),
                            dtype, counts)
                counts["num_docs"] += len(texts)
                bar.update(len(texts))
            last = packer.finish()
            _write_rows(fh, fs, quality, last, dtype, counts)
            if len(last.ids):
                counts["last_len"] = last.real_len

    atomic_write_with(folder / TOKENS, lambda tokens_tmp: atomic_write_with(
        folder / STARTS, lambda starts_tmp: write(tokens_tmp, starts_tmp)))
    scores = np.concatenate(quality) if quality else np.zeros(0, dtype=np.float32)
    atomic_write_with(folder / QUALITY, lambda tmp: scores.astype(np.float32).tofile(tmp))
    n, t = counts["num_seqs"], max_seq_len
    meta = {"record": record, "dtype": dtype.name, "max_seq_len": t, "num_seqs": n, "num_docs": counts["num_docs"],
            "last_len": counts["last_len"] if n else 0,
            "num_tokens": (n - 1) * t + counts["last_len"] if n else 0,
            "word_starts": "word_ids" if getattr(tokenizer, "is_fast", False) else "every token",
            "scored_seqs": int(np.isfinite(scores).sum()),
            "tool_version": __version__, "built": now_utc()}
    atomic_write_json(folder / META, meta)
    log.info("token cache %s: tokenised %d documents into %d packed sequences (%d tokens, %s)",
             folder, meta["num_docs"], n, meta["num_tokens"], dtype.name)


def word_starts(encoded) -> list[list[int]] | None:
    """Per document, 1 where a token begins a word (the fast tokenizer's word ids change); None from a slow
    tokenizer, which has no word ids (every token then counts as a word)."""
    if not getattr(encoded, "is_fast", False):
        return None
    out = []
    for i in range(len(encoded["input_ids"])):
        ids = encoded.word_ids(i)
        out.append([int(w is None or j == 0 or w != ids[j - 1]) for j, w in enumerate(ids)])
    return out


def _write_rows(fh, fs, quality: list[np.ndarray], packed: Packed, dtype: np.dtype, counts: dict) -> None:
    rows = packed.ids
    if not len(rows):
        return
    if int(rows.max()) > np.iinfo(dtype).max:  # an id beyond len(tokenizer): never narrow it silently
        raise RuntimeError(f"token id {int(rows.max())} does not fit {dtype.name}")
    fh.write(rows.astype(dtype).tobytes())
    fs.write(packed.starts.astype(np.uint8).tobytes())
    quality.append(packed.quality)
    counts["num_seqs"] += len(rows)


def sampled_texts(corpus_dir: str | Path, split: str, tokenizer, max_tokens: int, seed: int) -> list[str]:
    """A seeded random sample of the split's documents, in the order of ``np.random.default_rng(seed)
    .permutation(number of documents)``, just long enough to hold ``max_tokens`` scorable tokens (token ids other
    than special ones, counted as adapt.evaluation.pppl counts its budget). One streaming pass; memory holds only
    the sample, never the whole split. ``max_tokens`` <= 0: none."""
    import heapq

    if max_tokens <= 0:
        return []
    shards = split_shards(corpus_dir, split)
    rank = np.empty(count_rows(shards), dtype=np.int64)
    rank[np.random.default_rng(seed).permutation(len(rank))] = np.arange(len(rank))  # doc -> place in the order
    special, held, used, doc = set(tokenizer.all_special_ids), [], 0, 0
    for batch in iter_text_batches(shards, 64):
        for text, ids in zip(batch, tokenizer(batch, add_special_tokens=False)["input_ids"]):
            n = sum(i not in special for i in ids)
            heapq.heappush(held, (-int(rank[doc]), text, n))  # the latest-placed document on top
            used, doc = used + n, doc + 1
            while len(held) > 1 and used - held[0][2] >= max_tokens:
                used -= heapq.heappop(held)[2]  # the sample is complete without the latest-placed document
    return [text for _, text, _ in sorted(held, reverse=True)]
