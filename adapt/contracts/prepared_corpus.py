"""The prepared corpus on disk: the one writer (prepare) and the one reader (pretrain, score) of its shards.

``<corpus>/train/part-NNNNN.parquet`` and ``<corpus>/heldout/part-NNNNN.parquet`` with the columns of
``OUTPUT_SCHEMA`` (readers need at least ``id`` and ``text``), ``removed.parquet`` (``REMOVED_SCHEMA``),
``profile.json`` and ``profile.md``. ``read_texts`` also reads loose files in any format prepare reads.
"""

from __future__ import annotations

from pathlib import Path
from typing import Iterator

import pyarrow as pa
import pyarrow.parquet as pq

from adapt.common.errors import InputError
from adapt.common.io import atomic_write_with
from adapt.config.score import SPLITS

SHARD_GLOB = "part-*.parquet"
OUTPUT_SCHEMA = pa.schema([("id", pa.string()), ("text", pa.string()), ("source", pa.string()),
                           ("quality", pa.float32()), ("cluster_id", pa.int64()), ("cluster_size", pa.int32()),
                           ("words", pa.int32())])
REMOVED_SCHEMA = pa.schema([("id", pa.string()), ("reason", pa.string()), ("detail", pa.string()),
                            ("source", pa.string())])
REPORT_FILES = ("removed.parquet", "profile.json", "profile.md")


class ShardWriter:
    """Rows into ``folder/part-00000.parquet``, ``part-00001``..., at most ``shard_docs`` rows each, each shard
    written atomically. At least one (possibly empty) shard is always written."""

    def __init__(self, folder: Path, schema: pa.Schema, shard_docs: int):
        self.folder, self.schema, self.shard_docs = Path(folder), schema, shard_docs
        self.folder.mkdir(parents=True, exist_ok=True)
        self.rows: list[dict] = []
        self.shards = 0
        self.count = 0

    def add(self, row: dict) -> None:
        self.rows.append(row)
        self.count += 1
        if len(self.rows) >= self.shard_docs:
            self._flush()

    def _flush(self) -> None:
        table = pa.Table.from_pylist(self.rows, schema=self.schema)
        shard = self.folder / f"part-{self.shards:05d}.parquet"
        atomic_write_with(shard, lambda tmp: pq.write_table(table, str(tmp)))
        self.shards += 1
        self.rows = []

    def close(self) -> None:
        if self.rows or self.shards == 0:
            self._flush()


def clear_prepared(out_dir: Path) -> None:
    """Remove the outputs of an earlier prepare run in ``out_dir`` (only files the prepare job writes)."""
    for split in SPLITS:
        for f in (Path(out_dir) / split).glob(SHARD_GLOB):
            f.unlink()
    for name in REPORT_FILES:
        (Path(out_dir) / name).unlink(missing_ok=True)


def is_prepared_corpus(path: Path | str) -> bool:
    path = Path(path)
    return path.is_dir() and any((path / s).is_dir() for s in SPLITS)


def split_shards(corpus_dir: Path | str, split: str) -> list[Path]:
    """The Parquet shards of one split of a prepared corpus, in order."""
    corpus_dir = Path(corpus_dir)
    split_dir = corpus_dir / split
    if not split_dir.is_dir():
        raise InputError(f"{corpus_dir}: no {split}/ folder; is this the output folder of the prepare job?")
    shards = sorted(split_dir.glob(SHARD_GLOB))
    if not shards:
        raise InputError(f"{split_dir}: no {SHARD_GLOB} shards; run the prepare job into {corpus_dir} again")
    return shards


def iter_text_batches(shards: list[Path], batch_rows: int) -> Iterator[list[str]]:
    """The ``text`` column of the shards, streamed in batches of at most ``batch_rows`` documents (only that
    column is read; memory stays flat however large the split is). A missing text counts as empty."""
    for shard in shards:
        try:
            reader = pq.ParquetFile(shard)
        except (pa.ArrowException, OSError) as exc:
            raise InputError(f"{shard}: not a readable Parquet file ({exc}); run the prepare job again") from exc
        if "text" not in reader.schema_arrow.names:
            raise InputError(f"{shard}: no 'text' column; it was not written by the prepare job")
        for batch in reader.iter_batches(batch_size=batch_rows, columns=["text"]):
            yield [t if t is not None else "" for t in batch.column(0).to_pylist()]


def iter_scored_batches(shards: list[Path], batch_rows: int) -> Iterator[tuple[list[str], list[float | None]]]:
    """Like ``iter_text_batches``, with each document's ``quality`` beside its text (None where a shard has no
    quality column or a row no score)."""
    for shard in shards:
        try:
            reader = pq.ParquetFile(shard)
        except (pa.ArrowException, OSError) as exc:
            raise InputError(f"{shard}: not a readable Parquet file ({exc}); run the prepare job again") from exc
        names = reader.schema_arrow.names
        if "text" not in names:
            raise InputError(f"{shard}: no 'text' column; it was not written by the prepare job")
        columns = ["text"] + (["quality"] if "quality" in names else [])
        for batch in reader.iter_batches(batch_size=batch_rows, columns=columns):
            texts = [t if t is not None else "" for t in batch.column(0).to_pylist()]
            scores = batch.column(1).to_pylist() if len(columns) == 2 else [None] * len(texts)
            yield texts, scores


def count_rows(shards: list[Path]) -> int:
    """Documents in the shards, from the Parquet footers (nothing else is read)."""
    return sum(pq.ParquetFile(shard).metadata.num_rows for shard in shards)


def read_prepared(corpus_dir: Path | str, split: str, columns: list[str] | None = None) -> list[dict]:
    """Rows of one split of a prepared corpus, in shard order."""
    rows: list[dict] = []
    for shard in split_shards(corpus_dir, split):
        table = pq.read_table(shard, columns=columns)
        if "text" not in table.column_names:
            raise InputError(f"{shard}: no 'text' column; it was not written by the prepare job")
        rows.extend(table.to_pylist())
    return rows


def read_texts(path: Path | str, split: str = "heldout", text_field: str = "text") -> list[dict]:
    """Documents as dicts with ``id`` and ``text`` from a prepared corpus or from loose files; a prepared
    corpus's documents also carry their duplicate ``cluster`` (its cluster_id)."""
    path = Path(path)
    if not path.exists():
        raise InputError(f"{path}: does not exist; give a prepared corpus folder or text files "
                         "(.txt, .jsonl, .csv, .parquet, .gz)")
    if is_prepared_corpus(path):
        return [{"id": str(r.get("id", i)), "text": r["text"],
                 **({"cluster": int(r["cluster_id"])} if r.get("cluster_id") is not None else {})}
                for i, r in enumerate(read_prepared(path, split, columns=None))]
    from adapt.config.prepare import ReadConfig
    from adapt.corpus.readers import ReadStats, read_documents

    # the prepare stage's reader: txt, jsonl, csv, parquet, gzip, fallback encoding, one-line errors
    docs = [{"id": d.id, "text": d.text}
            for d in read_documents([str(path)], ReadConfig(text_field=text_field), ReadStats())]
    docs = [d for d in docs if d["text"] and d["text"].strip()]
    if not docs:
        raise InputError(f"{path}: no readable documents (.txt, .jsonl, .csv, .parquet, optionally .gz, "
                         "with non-empty text)")
    return docs
