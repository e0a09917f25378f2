"""Read text sets: a prepared corpus folder (its Parquet split), or loose files in any format prepare reads.

This is the one reader every stage uses for the prepare stage's output contract:
``<corpus>/train/*.parquet`` and ``<corpus>/heldout/*.parquet`` with at least the columns ``id`` and ``text``.
"""

from __future__ import annotations

from pathlib import Path

import pyarrow.parquet as pq

from adapt.common.errors import InputError

SPLITS = ("train", "heldout")


def is_prepared_corpus(path: Path | str) -> bool:
    path = Path(path)
    return path.is_dir() and any((path / s).is_dir() for s in SPLITS)


def read_prepared(corpus_dir: Path | str, split: str, columns: list[str] | None = None) -> list[dict]:
    """Rows of one split of a prepared corpus, in shard order."""
    corpus_dir = Path(corpus_dir)
    split_dir = corpus_dir / split
    if not split_dir.is_dir():
        raise InputError(f"{corpus_dir}: no {split}/ folder; is this the output folder of the prepare job?")
    shards = sorted(split_dir.glob("*.parquet"))
    if not shards:
        raise InputError(f"{split_dir}: no .parquet shards; run the prepare job into {corpus_dir} again")
    rows: list[dict] = []
    for shard in shards:
        table = pq.read_table(shard, columns=columns)
        if "text" not in table.column_names:
            raise InputError(f"{shard}: no 'text' column; it was not written by the prepare job")
        rows.extend(table.to_pylist())
    return rows


def read_texts(path: Path | str, split: str = "heldout", text_field: str = "text") -> list[dict]:
    """Documents as dicts with ``id`` and ``text`` from a prepared corpus or from loose files."""
    path = Path(path)
    if not path.exists():
        raise InputError(f"{path}: does not exist; give a prepared corpus folder or text files (.txt, .jsonl, .csv, .parquet, .gz)")
    if is_prepared_corpus(path):
        return [{"id": str(r.get("id", i)), "text": r["text"]}
                for i, r in enumerate(read_prepared(path, split, columns=None))]
    from adapt.config.prepare import ReadConfig
    from adapt.corpus.readers import ReadStats, read_documents

    # the prepare stage's reader: txt, jsonl, csv, parquet, gzip, fallback encoding, one-line errors
    docs = [{"id": d.id, "text": d.text}
            for d in read_documents([str(path)], ReadConfig(text_field=text_field), ReadStats())]
    docs = [d for d in docs if d["text"] and d["text"].strip()]
    if not docs:
        raise InputError(f"{path}: no readable documents (.txt, .jsonl, .csv, .parquet, optionally .gz, with non-empty text)")
    return docs
