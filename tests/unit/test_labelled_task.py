"""One reader for labelled files: compare, the contamination check and the quality gold set see the same files
and the same texts, with the same errors."""

from __future__ import annotations

import gzip
import json
import re
from pathlib import Path

import pytest

from adapt.common.errors import InputError
from adapt.config.prepare import QualityConfig
from adapt.contracts.labelled_task import find_split_files, read_labelled_file, read_task
from adapt.corpus.contamination import load_task_texts
from adapt.corpus.quality import load_gold

ROWS = {"train": [("Tenant gave notice of the rent increase", "legal"), ("Nurse checked the dose", "clinical"),
                  ("Señor Pérez signed the lease", "legal")],
        "dev": [("The court heard the appeal", "legal"), ("Patient scan was clear", "clinical")],
        "test": [("Landlord kept the deposit", "legal"), ("Ward report was late", "clinical")]}


def _jsonl(rows) -> bytes:
    return "".join(json.dumps({"text": t, "label": lab}, ensure_ascii=False) + "\n" for t, lab in rows).encode()


def _delimited(rows, sep: str) -> bytes:
    return ("text" + sep + "label\n" + "".join(f'"{t}"{sep}{lab}\n' for t, lab in rows)).encode()


def _seen_by_compare(folder: Path) -> set[tuple[str, str]]:
    task = read_task(folder)
    return {(s, t) for s in ("train", "dev", "test") for t in getattr(task, s).texts}


def _seen_by_contamination(folder: Path) -> set[tuple[str, str]]:
    return {(t.split, t.text) for t in load_task_texts(folder, "text")}


def _error(fn, *args) -> str:
    with pytest.raises(InputError) as err:
        fn(*args)
    message = str(err.value)
    assert "\n" not in message
    return re.sub(r"^[\w.]+=", "", message)  # without the config key, which differs between callers


def test_every_format_is_read_alike_by_compare_and_contamination(tmp_path):
    (tmp_path / "train.tsv").write_bytes(_delimited(ROWS["train"], "\t"))
    (tmp_path / "dev.jsonl.gz").write_bytes(gzip.compress(_jsonl(ROWS["dev"])))
    (tmp_path / "test.csv").write_bytes(b"\xef\xbb\xbf" + _delimited(ROWS["test"], ","))  # UTF-8 with a BOM
    expected = {(s, t) for s, rows in ROWS.items() for t, _ in rows}
    assert _seen_by_compare(tmp_path) == expected
    assert _seen_by_contamination(tmp_path) == expected


def test_a_split_given_twice_is_refused_by_both(tmp_path):
    for split, rows in ROWS.items():
        (tmp_path / f"{split}.jsonl").write_bytes(_jsonl(rows))
    (tmp_path / "test.csv.gz").write_bytes(gzip.compress(_delimited([("Unseen text", "legal")], ",")))
    compare_error = _error(read_task, tmp_path)
    assert "test.csv.gz" in compare_error and "test.jsonl" in compare_error
    assert _error(load_task_texts, tmp_path, "text") == compare_error


def test_files_that_are_no_split_file_are_ignored_by_both(tmp_path, caplog):
    for split, rows in ROWS.items():
        (tmp_path / f"{split}.jsonl").write_bytes(_jsonl(rows))
    (tmp_path / "train.extra.jsonl").write_bytes(_jsonl([("Extra text never scored", "legal")]))
    (tmp_path / "test.txt").write_text("notes")
    assert _seen_by_contamination(tmp_path) == _seen_by_compare(tmp_path)
    assert "train.extra.jsonl" in caplog.text  # said once, not silently


def test_one_encoding_rule_for_tasks_and_the_gold_set(tmp_path):
    for split, rows in ROWS.items():
        (tmp_path / f"{split}.jsonl").write_bytes(_jsonl(rows))
    legacy = "".join(json.dumps({"text": t, "label": lab}, ensure_ascii=False) + "\n" for t, lab in ROWS["train"])
    (tmp_path / "train.jsonl").write_bytes(legacy.encode("cp1252"))
    compare_error = _error(read_task, tmp_path)
    assert "train.jsonl" in compare_error and "UTF-8" in compare_error
    assert _error(load_task_texts, tmp_path, "text") == compare_error
    gold = tmp_path / "train.jsonl"
    with pytest.raises(InputError) as err:
        load_gold(gold, QualityConfig())
    assert str(err.value) == compare_error


def test_missing_field_reads_the_same_everywhere(tmp_path):
    f = tmp_path / "gold.jsonl"
    f.write_text(json.dumps({"text": "a", "label": "good"}) + "\n" + json.dumps({"text": "b"}) + "\n")
    with pytest.raises(InputError, match=r"gold.jsonl:2: no field 'label' .*set quality.label_field"):
        read_labelled_file(f, "text", "label", key_prefix="quality")
    with pytest.raises(InputError, match=r"gold.jsonl:2: no field 'label' .*set quality.label_field"):
        load_gold(f, QualityConfig())


def test_split_files_are_found_once(tmp_path):
    (tmp_path / "test.jsonl").write_bytes(_jsonl(ROWS["test"]))
    assert find_split_files(tmp_path, "contamination.task_dir", required=False) == {"test": tmp_path / "test.jsonl"}
    with pytest.raises(InputError, match=r"task.dir=.*no train file.*train.jsonl, train.csv or train.tsv"):
        find_split_files(tmp_path, "task.dir")
