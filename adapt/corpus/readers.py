"""Stream documents out of files and folders: txt/md, jsonl, csv/tsv, parquet, each optionally gzipped.

Files are read one at a time and documents yielded one at a time. Binary files and unknown extensions are
skipped with a reason; text that is not UTF-8 is decoded with a fallback encoding and counted. A file that
claims a format but cannot be read (broken JSON, corrupt gzip, missing text field) is an ``InputError``
naming the file and the fix: silently skipping it would change the corpus without anyone noticing.
"""

from __future__ import annotations

import csv
import gzip
import io
import json
import logging
import sys
import zlib
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterator

import pyarrow.parquet as pq

from adapt.config.prepare import ReadConfig
from adapt.common.errors import InputError

log = logging.getLogger(__name__)

TEXT_SUFFIXES = {".txt": "text", ".text": "text", ".jsonl": "jsonl", ".ndjson": "jsonl",
                 ".csv": "csv", ".tsv": "csv", ".parquet": "parquet"}
SNIFF_BYTES = 8192
csv.field_size_limit(min(sys.maxsize, 2**31 - 1))  # long documents in one CSV cell


@dataclass
class RawDoc:
    id: str
    text: str
    source: str


@dataclass
class ReadStats:
    files_read: int = 0
    files_skipped: dict[str, str] = field(default_factory=dict)  # path -> reason
    fallback_decoded: Counter = field(default_factory=Counter)  # path -> lines/docs decoded with the fallback
    docs_read: int = 0
    empty_records: int = 0
    ids_made_unique: int = 0


def list_input_files(inputs: list[str]) -> list[tuple[Path, str]]:
    """(file, source name) for every non-hidden file under the inputs, sorted; missing paths are an error."""
    files: list[tuple[Path, str]] = []
    for raw in inputs:
        path = Path(raw)
        if not path.exists():
            raise InputError(f"inputs: {path} does not exist; give existing files or folders, "
                             f"e.g. inputs=[corpora_samples/legal]")
        if path.is_file():
            files.append((path, path.name))
            continue
        for f in sorted(path.rglob("*")):
            rel = f.relative_to(path)
            if f.is_file() and not any(part.startswith(".") for part in rel.parts):
                files.append((f, f"{path.name}/{rel.as_posix()}"))
    return files


def file_kind(path: Path) -> tuple[str | None, bool]:
    """(format name or None, gzipped) from the file name."""
    suffixes = [s.lower() for s in path.suffixes]
    gz = bool(suffixes) and suffixes[-1] == ".gz"
    if gz:
        suffixes = suffixes[:-1]
    return (TEXT_SUFFIXES.get(suffixes[-1]) if suffixes else None), gz


def looks_binary(head: bytes) -> bool:
    """NUL bytes or many control bytes in the first block: not a text file (common practice, as in file(1))."""
    if not head:
        return False
    if b"\x00" in head:
        return True
    controls = sum(1 for b in head if b < 32 and b not in (9, 10, 12, 13, 27))
    return controls / len(head) > 0.05


def _open_bytes(path: Path, gz: bool) -> io.BufferedIOBase:
    return gzip.open(path, "rb") if gz else open(path, "rb")  # noqa: SIM115 - closed by the caller


def _sniff(path: Path, gz: bool) -> bytes:
    try:
        with _open_bytes(path, gz) as fh:
            return fh.read(SNIFF_BYTES)
    except (OSError, EOFError, zlib.error) as exc:
        raise InputError(f"{path}: cannot be read ({type(exc).__name__}: {exc}); repair or remove the file, "
                         "or leave it out of inputs") from exc


class _Decoder:
    """UTF-8 first, then the fallback encoding (undecodable bytes become U+FFFD and are caught later)."""

    def __init__(self, fallback: str, stats: ReadStats, source: str):
        self.fallback, self.stats, self.source = fallback, stats, source

    def __call__(self, data: bytes) -> str:
        try:
            return data.decode("utf-8-sig" if data.startswith(b"\xef\xbb\xbf") else "utf-8")
        except UnicodeDecodeError:
            self.stats.fallback_decoded[self.source] += 1
            return data.decode(self.fallback, errors="replace")


def _read_text_file(path: Path, gz: bool, decode: _Decoder, source: str) -> Iterator[tuple[str | None, str, str]]:
    with _open_bytes(path, gz) as fh:
        yield None, decode(fh.read()), source


def _read_jsonl(path: Path, gz: bool, decode: _Decoder, cfg: ReadConfig, source: str):
    with _open_bytes(path, gz) as fh:
        for lineno, raw in enumerate(fh, start=1):
            line = decode(raw).strip()
            if not line:
                continue
            try:
                rec = json.loads(line)
            except json.JSONDecodeError as exc:
                raise InputError(f"{path}:{lineno}: not valid JSON ({exc.msg}); fix or remove that line") from exc
            if not isinstance(rec, dict) or cfg.text_field not in rec:
                keys = sorted(rec) if isinstance(rec, dict) else type(rec).__name__
                raise InputError(f"{path}:{lineno}: no field {cfg.text_field!r} (found {keys}); "
                                 f"set read.text_field to the field holding the text")
            text = rec[cfg.text_field]
            rid = rec.get(cfg.id_field)
            yield (None if rid is None else str(rid)), ("" if text is None else str(text)), f"{source}:{lineno}"


def _read_csv(path: Path, gz: bool, decode: _Decoder, cfg: ReadConfig, source: str):
    delimiter = "\t" if ".tsv" in [s.lower() for s in path.suffixes] else cfg.csv_delimiter
    with _open_bytes(path, gz) as fh:
        reader = csv.reader((decode(raw) for raw in fh), delimiter=delimiter)
        try:
            header = next(reader, None)
            if header is None:
                return
            if cfg.text_field not in header:
                raise InputError(f"{path}: no column {cfg.text_field!r} (found {header}); "
                                 f"set read.text_field to the column holding the text")
            ti = header.index(cfg.text_field)
            ii = header.index(cfg.id_field) if cfg.id_field in header else None
            for rowno, row in enumerate(reader, start=2):
                if not row:
                    continue
                text = row[ti] if ti < len(row) else ""
                rid = row[ii] if ii is not None and ii < len(row) and row[ii] else None
                yield rid, text, f"{source}:{rowno}"
        except csv.Error as exc:
            raise InputError(f"{path}: broken CSV ({exc}); fix the quoting or set read.csv_delimiter") from exc


def _read_parquet(path: Path, gz: bool, cfg: ReadConfig, source: str):
    try:
        pf = pq.ParquetFile(io.BytesIO(gzip.decompress(path.read_bytes())) if gz else path)
    except Exception as exc:  # pyarrow raises several types for a damaged file
        raise InputError(f"{path}: not a readable Parquet file ({type(exc).__name__}); "
                         "repair it or leave it out of inputs") from exc
    names = pf.schema_arrow.names
    if cfg.text_field not in names:
        raise InputError(f"{path}: no column {cfg.text_field!r} (found {names}); "
                         f"set read.text_field to the column holding the text")
    columns = [cfg.text_field] + ([cfg.id_field] if cfg.id_field in names else [])
    row = 0
    for batch in pf.iter_batches(columns=columns, batch_size=2048):
        texts = batch.column(cfg.text_field).to_pylist()
        ids = batch.column(cfg.id_field).to_pylist() if len(columns) == 2 else [None] * len(texts)
        for rid, text in zip(ids, texts):
            yield (None if rid is None else str(rid)), ("" if text is None else str(text)), f"{source}:{row}"
            row += 1


def _records(path: Path, kind: str, gz: bool, cfg: ReadConfig, stats: ReadStats, source: str):
    decode = _Decoder(cfg.fallback_encoding, stats, source)
    if kind == "text":
        return _read_text_file(path, gz, decode, source)
    if kind == "jsonl":
        return _read_jsonl(path, gz, decode, cfg, source)
    if kind == "csv":
        return _read_csv(path, gz, decode, cfg, source)
    return _read_parquet(path, gz, cfg, source)


def read_documents(inputs: list[str], cfg: ReadConfig, stats: ReadStats) -> Iterator[RawDoc]:
    """Every document under ``inputs``, one at a time; ``stats`` is filled in as the files are read."""
    seen_ids: set[str] = set()
    for path, source in list_input_files(inputs):
        kind, gz = file_kind(path)
        head = _sniff(path, gz)
        if kind is None:
            why = "binary file" if looks_binary(head) else "unsupported extension"
            stats.files_skipped[source] = f"{why} ({''.join(path.suffixes) or 'no extension'})"
            continue
        if kind != "parquet" and looks_binary(head):
            stats.files_skipped[source] = f"binary content in a {kind} file"
            continue
        stats.files_read += 1
        try:
            for rid, text, where in _records(path, kind, gz, cfg, stats, source):
                if not text.strip():
                    stats.empty_records += 1
                    continue
                doc_id = rid if rid is not None else where
                if doc_id in seen_ids:
                    stats.ids_made_unique += 1
                    doc_id = f"{doc_id}@{where}"
                seen_ids.add(doc_id)
                stats.docs_read += 1
                yield RawDoc(doc_id, text, source)
        except (OSError, EOFError, zlib.error) as exc:
            raise InputError(f"{path}: cannot be read ({type(exc).__name__}: {exc}); repair or remove the file, "
                             "or leave it out of inputs") from exc
    if stats.fallback_decoded:
        log.info("decoded %d records/files from %d file(s) with the fallback encoding %s",
                 sum(stats.fallback_decoded.values()), len(stats.fallback_decoded), cfg.fallback_encoding)
