"""Parquet writing: bounded-size output shards, a removal log, and on-disk spills between passes."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Iterator

import pyarrow as pa
import pyarrow.parquet as pq

OUTPUT_SCHEMA = pa.schema([("id", pa.string()), ("text", pa.string()), ("source", pa.string()),
                           ("quality", pa.float32()), ("cluster_id", pa.int64()), ("cluster_size", pa.int32()),
                           ("words", pa.int32())])
REMOVED_SCHEMA = pa.schema([("id", pa.string()), ("reason", pa.string()), ("detail", pa.string()),
                            ("source", pa.string())])


class ShardWriter:
    """Rows into ``folder/part-00000.parquet``, ``part-00001``..., at most ``shard_docs`` rows each; each shard is
    written to a temp file and renamed. At least one (possibly empty) shard is always written."""

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
        path = self.folder / f"part-{self.shards:05d}.parquet"
        tmp = self.folder / f".{path.name}.tmp"
        pq.write_table(table, tmp)
        os.replace(tmp, path)
        self.shards += 1
        self.rows = []

    def close(self) -> None:
        if self.rows or self.shards == 0:
            self._flush()


class Spill:
    """A temporary Parquet file written in row groups and read back in batches (keeps text out of memory)."""

    def __init__(self, path: Path, schema: pa.Schema):
        self.path, self.schema = Path(path), schema
        self.path.parent.mkdir(parents=True, exist_ok=True)
        self.writer = pq.ParquetWriter(self.path, schema)
        self.count = 0

    def write(self, rows: list[dict]) -> None:
        if rows:
            self.writer.write_table(pa.Table.from_pylist(rows, schema=self.schema))
            self.count += len(rows)

    def close(self) -> None:
        self.writer.close()

    def batches(self, batch_size: int) -> Iterator[list[dict]]:
        pf = pq.ParquetFile(self.path)
        for batch in pf.iter_batches(batch_size=batch_size):
            yield batch.to_pylist()


def clear_outputs(out_dir: Path) -> None:
    """Remove the outputs of an earlier prepare run in ``out_dir`` (only files this job writes)."""
    for split in ("train", "heldout"):
        for f in (out_dir / split).glob("part-*.parquet"):
            f.unlink()
    for name in ("removed.parquet", "profile.json", "profile.md"):
        (out_dir / name).unlink(missing_ok=True)
