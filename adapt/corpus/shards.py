"""On-disk spills between the prepare passes (temporary Parquet files; the output shards are written by
``adapt.contracts.prepared_corpus``)."""

from __future__ import annotations

from pathlib import Path
from typing import Iterator

import pyarrow as pa
import pyarrow.parquet as pq


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

