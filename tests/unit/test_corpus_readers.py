"""Reading documents from txt, jsonl, csv, parquet, gzip and nested folders; bad files."""

from __future__ import annotations

import gzip
import json

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from adapt.config.prepare import ReadConfig
from adapt.corpus.readers import ReadStats, read_documents
from adapt.common.errors import InputError


def _read(paths, **kw) -> tuple[list, ReadStats]:
    stats = ReadStats()
    docs = list(read_documents([str(p) for p in paths], ReadConfig(**kw), stats))
    return docs, stats


def test_every_format_nested_and_gzipped(tmp_path):
    root = tmp_path / "in"
    (root / "a" / "b").mkdir(parents=True)
    (root / "one.txt").write_text("plain text document", encoding="utf-8")
    (root / "a" / "recs.jsonl").write_text(json.dumps({"id": "j1", "text": "from jsonl"}) + "\n\n"
                                           + json.dumps({"text": "no id here"}) + "\n", encoding="utf-8")
    (root / "a" / "b" / "table.csv").write_text('id,text\nc1,"csv, with comma\nand newline"\n', encoding="utf-8")
    with gzip.open(root / "a" / "b" / "packed.jsonl.gz", "wt", encoding="utf-8") as fh:
        fh.write(json.dumps({"id": "g1", "text": "gzipped jsonl"}) + "\n")
    pq.write_table(pa.table({"id": ["p1", "p2"], "text": ["parquet one", None]}), root / "a" / "t.parquet")
    (root / ".hidden.txt").write_text("never read", encoding="utf-8")
    docs, stats = _read([root])
    by_id = {d.id: d.text for d in docs}
    assert by_id["j1"] == "from jsonl" and by_id["g1"] == "gzipped jsonl" and by_id["p1"] == "parquet one"
    assert by_id["c1"] == "csv, with comma\nand newline"
    assert "plain text document" in by_id.values() and "no id here" in by_id.values()
    assert "never read" not in by_id.values()
    assert stats.files_read == 5 and stats.docs_read == 6 and stats.empty_records == 1


def test_binary_files_skipped_and_cp1252_decoded(tmp_path):
    (tmp_path / "photo.png").write_bytes(b"\x89PNG\r\n\x1a\n\x00\x00\x00IHDR")
    (tmp_path / "fake.txt").write_bytes(b"MZ\x90\x00\x03\x00\x00\x00\x04\x00")
    (tmp_path / "legacy.txt").write_bytes("Señor Müller’s café".encode("cp1252"))
    docs, stats = _read([tmp_path])
    assert [d.text for d in docs] == ["Señor Müller’s café"]
    assert set(stats.files_skipped) == {f"{tmp_path.name}/photo.png", f"{tmp_path.name}/fake.txt"}
    assert "binary" in stats.files_skipped[f"{tmp_path.name}/fake.txt"]
    assert sum(stats.fallback_decoded.values()) == 1


def test_configurable_fields_and_duplicate_ids(tmp_path):
    f = tmp_path / "x.jsonl"
    f.write_text("\n".join(json.dumps({"key": "k", "body": f"text {i}"}) for i in range(3)), encoding="utf-8")
    docs, stats = _read([f], text_field="body", id_field="key")
    assert [d.text for d in docs] == ["text 0", "text 1", "text 2"]
    assert len({d.id for d in docs}) == 3 and stats.ids_made_unique == 2


@pytest.mark.parametrize("name,content,needle", [
    ("a.jsonl", b'{"id": 1, "body": "x"}\n', "no field 'text'"),
    ("b.jsonl", b'{"text": "ok"}\n{broken\n', "b.jsonl:2: not valid JSON"),
    ("c.csv", b"id,body\n1,x\n", "no column 'text'"),
    ("d.jsonl.gz", b"this is not gzip data at all", "cannot be read"),
    ("e.parquet", b"PAR1 not really parquet", "not a readable Parquet file"),
])
def test_bad_files_raise_one_clear_error(tmp_path, name, content, needle):
    (tmp_path / name).write_bytes(content)
    with pytest.raises(InputError) as err:
        _read([tmp_path])
    msg = str(err.value)
    assert needle in msg and name in msg and "\n" not in msg


def test_missing_input_path(tmp_path):
    with pytest.raises(InputError, match="does not exist"):
        _read([tmp_path / "nope"])

