"""Labelled files: a classification task folder (train, dev and test files) and any other file of labelled
texts (the quality gold set). This is the one reader of them, used by compare, the contamination check and the
quality classifier, so all three see the same files and the same texts.

Formats: .jsonl (one JSON object per line), .csv and .tsv (a header row), each optionally gzipped (.gz). Text
must be UTF-8 (a byte-order mark is allowed); other bytes are refused with one clear error rather than guessed.
Labels are kept as strings and numbered in sorted order of the training labels, so every arm and every run sees
the same label ids. Input files are only read, never changed.

Multi-label tasks: a .jsonl label field holding a list of strings (``["tenancy", "contract"]``; ``[]`` = no
label) makes the task multi-label, a scalar in the same task counting as a one-label list; in .csv/.tsv the
``label_delimiter`` (task.label_delimiter) splits the label cell (an empty cell = no label).
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

from adapt.common.errors import InputError

log = logging.getLogger(__name__)

SPLITS = ("train", "dev", "test")
FORMATS = {".jsonl": "jsonl", ".csv": "csv", ".tsv": "tsv"}  # each optionally followed by .gz
FORMAT_NAMES = ".jsonl, .csv or .tsv (optionally .gz)"
csv.field_size_limit(min(sys.maxsize, 2**31 - 1))  # long texts in one cell


@dataclass
class Example:
    """One record of a labelled file; ``line`` counts a CSV/TSV header as line 1."""

    line: int
    text: str
    label: str | list[str] | None = None  # a list only where label lists are allowed (read_task)
    id: str | None = None


@dataclass
class Split:
    """One split: texts and label ids (indices into ``Task.labels``): one id per example, or in a multi-label
    task a sorted list of ids per example (possibly empty)."""

    file: Path
    texts: list[str] = field(default_factory=list)
    label_ids: list = field(default_factory=list)  # list[int], or list[list[int]] when multi-label

    def __len__(self) -> int:
        return len(self.texts)


@dataclass
class Task:
    dir: Path
    labels: list[str]
    train: Split
    dev: Split
    test: Split
    # further test sets (name -> split), e.g. other document types or sources, scored by every arm
    other_tests: dict[str, Split] = field(default_factory=dict)
    # several labels per example (Split.label_ids holds a list of ids per example)
    multi_label: bool = False

    @property
    def files(self) -> list[Path]:
        return [self.train.file, self.dev.file, self.test.file] + [s.file for s in self.other_tests.values()]

    @property
    def sizes(self) -> dict[str, int]:
        return {"train": len(self.train), "dev": len(self.dev), "test": len(self.test),
                **{f"test:{name}": len(s) for name, s in self.other_tests.items()}}

    def with_train_subset(self, rows: list[int]) -> "Task":
        """The same task trained on ``rows`` of train only (dev and every test set unchanged)."""
        train = Split(self.train.file, [self.train.texts[i] for i in rows], [self.train.label_ids[i] for i in rows])
        return Task(self.dir, self.labels, train, self.dev, self.test, self.other_tests, self.multi_label)


def labelled_format(path: Path) -> tuple[str | None, bool]:
    """(format, gzipped) from the file name; the format is None for a name not ending in one of FORMATS."""
    name = path.name.lower()
    gz = name.endswith(".gz")
    name = name[:-3] if gz else name
    return next((kind for suffix, kind in FORMATS.items() if name.endswith(suffix)), None), gz


def _split_of(name: str) -> str | None:
    lower = name.lower()
    return next((s for s in SPLITS for suffix in FORMATS if lower in (s + suffix, s + suffix + ".gz")), None)


def find_split_files(task_dir: Path | str, key: str, required: bool = True) -> dict[str, Path]:
    """Split -> file of a task folder: ``<split>.jsonl``, ``.csv`` or ``.tsv``, optionally ``.gz``.

    ``key`` is the config key that named the folder. All of SPLITS are needed unless ``required`` is false
    (the contamination check reads whichever exist). Other files are ignored, with a warning for those whose
    name starts like a split file's (``train.old.jsonl``, ``test.txt``)."""
    task_dir = Path(task_dir)
    if not task_dir.is_dir():
        problem = "not a folder" if task_dir.exists() else "folder does not exist"
        raise InputError(f"{key}={task_dir}: {problem}; give a folder with train, dev and test files "
                         f"({FORMAT_NAMES})")
    found: dict[str, list[Path]] = {s: [] for s in SPLITS}
    for f in sorted(p for p in task_dir.iterdir() if p.is_file()):
        split = _split_of(f.name)
        if split is not None:
            found[split].append(f)
        elif f.name.split(".")[0].lower() in SPLITS:
            log.warning("%s: ignored; a split file is named train, dev or test followed by %s", f, FORMAT_NAMES)
    for split, files in found.items():
        if len(files) > 1:
            raise InputError(f"{key}={task_dir}: both {files[0].name} and {files[1].name} exist; keep only one "
                             f"{split} file")
        if required and not files:
            raise InputError(f"{key}={task_dir}: no {split} file; add {split}.jsonl, {split}.csv or {split}.tsv "
                             "(optionally .gz) with one example per line (a text and a label)")
    return {s: files[0] for s, files in found.items() if files}


def _read_bytes(path: Path, gz: bool) -> bytes:
    try:
        with (gzip.open(path, "rb") if gz else open(path, "rb")) as fh:
            return fh.read()
    except (OSError, EOFError, zlib.error) as exc:
        raise InputError(f"{path}: cannot be read ({type(exc).__name__}: {exc}); repair or replace it") from exc


def _rows_jsonl(path: Path, text: str) -> list[tuple[int, dict]]:
    rows = []
    for n, line in enumerate(text.split("\n"), start=1):  # not splitlines(): U+2028 may sit inside a string
        if not line.strip():
            continue
        try:
            obj = json.loads(line)
        except json.JSONDecodeError as exc:
            raise InputError(f"{path}:{n}: not valid JSON ({exc.msg}); write one JSON object per line") from exc
        if not isinstance(obj, dict):
            raise InputError(f"{path}:{n}: expected a JSON object with text and label fields, "
                             f"got {type(obj).__name__}")
        rows.append((n, obj))
    return rows


def _rows(path: Path) -> list[tuple[int, dict]]:
    kind, gz = labelled_format(path)
    if kind is None:
        raise InputError(f"{path}: not a labelled file; give a {FORMAT_NAMES} file")
    try:
        text = _read_bytes(path, gz).decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError(f"{path}: not UTF-8 text ({exc.reason}); save it as UTF-8") from exc
    if kind == "jsonl":
        return _rows_jsonl(path, text)
    try:
        reader = csv.DictReader(io.StringIO(text, newline=""), delimiter="\t" if kind == "tsv" else ",")
        return list(enumerate(reader, start=2))  # the header is line 1
    except csv.Error as exc:
        raise InputError(f"{path}: broken {kind.upper()} ({exc}); fix the quoting") from exc


def _label_list(path: Path, n: int, name: str, value: list, delimiter: str | None) -> list[str]:
    """The labels of a jsonl list (or of a split csv/tsv cell): non-empty strings, duplicates dropped."""
    bad = [v for v in value if not isinstance(v, (str, int)) or isinstance(v, bool) or str(v).strip() == ""]
    if bad:
        fix = (f"write each label between {delimiter!r} once, e.g. 'a{delimiter}b'" if delimiter is not None
               else 'write a list of non-empty label strings, e.g. ["a", "b"]')
        raise InputError(f"{path}:{n}: field {name!r} holds an empty or non-text label ({bad[0]!r}); {fix}")
    return list(dict.fromkeys(str(v).strip() for v in value))


def _read_label(path: Path, n: int, name: str, value, is_jsonl: bool, lists: bool,
                delimiter: str | None) -> str | list[str]:
    """One example's label: a string, or a list of strings where ``lists`` allows label lists."""
    if lists and is_jsonl and isinstance(value, list):
        return _label_list(path, n, name, value, None)
    if lists and not is_jsonl and delimiter is not None:
        cell = str(value).strip()
        return _label_list(path, n, name, cell.split(delimiter), delimiter) if cell else []
    if isinstance(value, (dict, list)) or str(value).strip() == "":
        raise InputError(f"{path}:{n}: field {name!r} must be a single non-empty label, got {value!r}"
                         + ("; to give several labels (or none) in a csv/tsv cell, set task.label_delimiter, "
                            "e.g. task.label_delimiter='|'" if lists and not is_jsonl else ""))
    if lists and is_jsonl and delimiter is not None and delimiter in str(value):
        raise InputError(f"{path}:{n}: field {name!r} is {value!r}, holding task.label_delimiter={delimiter!r}, "
                         "which splits csv/tsv cells only; in a jsonl file write the labels as a JSON list, "
                         f"e.g. {json.dumps(str(value).split(delimiter))}")
    return str(value).strip()


def read_labelled_file(path: Path | str, text_field: str = "text", label_field: str | None = None,
                       key_prefix: str = "task", label_lists: bool = False,
                       label_delimiter: str | None = None) -> list[Example]:
    """Examples of one labelled file, each with a non-empty text, and a label when ``label_field`` is given.

    ``key_prefix`` is the config group whose ``text_field`` / ``label_field`` chose the fields (task, quality,
    contamination), named in the messages. With ``label_lists`` a jsonl label may be a list of strings, and a
    csv/tsv label cell is split at ``label_delimiter`` when that is set; such labels come back as lists."""
    path = Path(path)
    rows = _rows(path)
    is_jsonl = labelled_format(path)[0] == "jsonl"
    wanted = [(text_field, "text")] + ([(label_field, "label")] if label_field is not None else [])
    if not rows:
        raise InputError(f"{path}: no examples; add at least one line with "
                         + " and ".join(repr(name) for name, _ in wanted))
    examples = []
    for n, row in rows:
        for name, what in wanted:
            if row.get(name) is None:
                found = sorted(k for k in row if k is not None)
                raise InputError(f"{path}:{n}: no field {name!r} (found {found}); set {key_prefix}.{what}_field "
                                 "to one of them")
        text = row[text_field]
        if not isinstance(text, str) or not text.strip():
            raise InputError(f"{path}:{n}: field {text_field!r} is empty or not text; give every example a text")
        label = None
        if label_field is not None:
            label = _read_label(path, n, label_field, row[label_field], is_jsonl, label_lists, label_delimiter)
        rid = row.get("id")
        examples.append(Example(n, text, label, None if rid in (None, "") else str(rid)))
    return examples


def _labels_of(examples: list[Example], multi: bool) -> list[list[str]]:
    """Each example's labels as a list (a scalar label is a one-label list)."""
    return [(e.label if isinstance(e.label, list) else [e.label]) for e in examples] if multi else \
        [[e.label] for e in examples]


def _ids(labels: list[list[str]], index: dict[str, int], multi: bool) -> list:
    return [sorted(index[lab] for lab in labs) for labs in labels] if multi else [index[labs[0]] for labs in labels]


def _checked_split(file: Path, examples: list[Example], labels: list[str], train_name: str, what: str,
                   allow_missing: bool, multi: bool) -> Split:
    """A dev or test split in the task's label ids; labels unseen in train are refused, and a test set lacking a
    task label too unless ``allow_missing``."""
    per_example = _labels_of(examples, multi)
    seen = {lab for labs in per_example for lab in labs}
    unseen = sorted(seen - set(labels))
    if unseen:
        line = next(e.line for e, labs in zip(examples, per_example) if unseen[0] in labs)
        raise InputError(f"{file}: label(s) {unseen[:5]} do not occur in {train_name} (first {unseen[0]!r} at "
                         f"{file.name}:{line}); add training examples for them or remove them from {file.name}")
    missing = sorted(set(labels) - seen)
    if missing and what == "test" and not allow_missing:
        raise InputError(f"{file}: no example of label {missing[0]!r}"
                         + (f" (nor {missing[1:5]})" if len(missing) > 1 else "")
                         + "; every metric averages over the task's labels, so the test set must hold each; "
                         "add examples, or set task.allow_missing_test_labels=true to score it as F1 = 0")
    if missing:
        log.warning("%s has no example of label(s) %s; macro-F1 still averages over all %d task labels, "
                    "counting F1 = 0 for a label without examples", file, missing, len(labels))
    index = {lab: i for i, lab in enumerate(labels)}
    return Split(file, [e.text for e in examples], _ids(per_example, index, multi))


def _is_multi(examples: dict[str, list[Example]], files: dict[str, Path], delimiter: str | None) -> bool:
    """Multi-label when a jsonl label is a list or a csv/tsv file is split at the delimiter; an empty label
    list is only allowed then (checked by the reader), and every jsonl file then counts scalars as lists."""
    if any(isinstance(e.label, list) for exs in examples.values() for e in exs):
        return True
    tabular = [f for f in files.values() if labelled_format(f)[0] != "jsonl"]
    if delimiter is not None and not tabular:
        raise InputError(f"task.label_delimiter={delimiter!r} is set but every task file is jsonl, where it does "
                         "not apply; write label lists as JSON lists (\"label\": [\"a\", \"b\"]) and unset "
                         "task.label_delimiter (null)")
    return delimiter is not None


def read_task(task_dir: Path | str, text_field: str = "text", label_field: str = "label",
              allow_missing_test_labels: bool = False, other_tests: dict[str, str] | None = None,
              label_delimiter: str | None = None) -> Task:
    """Read and check train/dev/test of a task folder, and the further test files ``other_tests`` (name ->
    file, a path relative to the task folder or absolute). A test set lacking one of the training labels is
    refused unless ``allow_missing_test_labels``. A jsonl label list, or ``label_delimiter`` for csv/tsv cells,
    makes the task multi-label (see the module notes)."""
    task_dir = Path(task_dir)
    files = find_split_files(task_dir, "task.dir")
    for name, path in (other_tests or {}).items():
        f = task_dir / path if not Path(path).is_absolute() else Path(path)
        if not f.is_file():
            raise InputError(f"task.other_tests.{name}={path}: file does not exist (relative paths start at "
                             f"task.dir={task_dir}); give a {FORMAT_NAMES} file with the task's fields")
        files[f"test:{name}"] = f
    examples = {s: read_labelled_file(f, text_field, label_field, "task", True, label_delimiter)
                for s, f in files.items()}
    multi = _is_multi(examples, files, label_delimiter)
    train_labels = _labels_of(examples["train"], multi)
    counts = Counter(lab for labs in train_labels for lab in labs)
    if len(counts) < 2:
        raise InputError(f"{files['train']}: only {len(counts)} class ({', '.join(counts)}); a classification task "
                         f"needs at least 2 labels in the training split")
    labels = sorted(counts)
    index = {lab: i for i, lab in enumerate(labels)}
    train = Split(files["train"], [e.text for e in examples["train"]], _ids(train_labels, index, multi))
    splits = {s: _checked_split(files[s], examples[s], labels, files["train"].name, "dev" if s == "dev" else "test",
                                allow_missing_test_labels, multi) for s in files if s != "train"}
    others = {s.split(":", 1)[1]: split for s, split in splits.items() if s.startswith("test:")}
    task = Task(dir=task_dir, labels=labels, train=train, dev=splits["dev"], test=splits["test"], other_tests=others,
                multi_label=multi)
    log.info("task %s: %d labels%s, sizes %s", task_dir, len(labels), " (multi-label)" if multi else "", task.sizes)
    return task
