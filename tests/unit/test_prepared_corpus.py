"""The prepared-corpus contract: one module writes the shards and reads them back."""

from __future__ import annotations

import os
from pathlib import Path

import pyarrow.parquet as pq
import pytest

from adapt.contracts.prepared_corpus import OUTPUT_SCHEMA, ShardWriter, clear_prepared, read_prepared


def _rows(n: int) -> list[dict]:
    return [{"id": f"d{i}", "text": f"text {i}", "source": "s.jsonl", "quality": 0.5, "cluster_id": i,
             "cluster_size": 1, "words": 2} for i in range(n)]


def _write(folder: Path, rows: list[dict], shard_docs: int) -> ShardWriter:
    writer = ShardWriter(folder, OUTPUT_SCHEMA, shard_docs)
    for r in rows:
        writer.add(r)
    writer.close()
    return writer


def test_shards_written_are_the_shards_read(tmp_path):
    rows = _rows(5)
    writer = _write(tmp_path / "train", rows, shard_docs=2)
    assert writer.shards == 3 and writer.count == 5
    assert read_prepared(tmp_path, "train") == rows


def test_a_rerun_leaves_no_stale_shard_behind(tmp_path):
    _write(tmp_path / "train", _rows(5), shard_docs=1)
    (tmp_path / "train" / "notes.parquet").write_bytes(b"not written by prepare")
    clear_prepared(tmp_path)
    _write(tmp_path / "train", _rows(2), shard_docs=1)
    assert read_prepared(tmp_path, "train") == _rows(2)


def test_a_failed_shard_write_leaves_no_temp_file(tmp_path, monkeypatch):
    def broken(table, where, **kw):  # noqa: ANN001 - pyarrow's signature
        Path(where).write_bytes(b"PAR1 half a file")
        raise OSError("disk full")

    monkeypatch.setattr(pq, "write_table", broken)
    with pytest.raises(OSError, match="disk full"):
        _write(tmp_path / "train", _rows(1), shard_docs=1)
    assert os.listdir(tmp_path / "train") == []
