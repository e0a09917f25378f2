"""Read a labelled classification task: a folder with train, dev and test files (.jsonl or .csv).

Labels are kept as strings and numbered in sorted order of the training labels, so every arm and every run
sees the same label ids. Input files are only read, never changed.
"""

from __future__ import annotations

import csv
import json
import logging
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path

from adapt.common.errors import InputError

log = logging.getLogger(__name__)

SPLITS = ("train", "dev", "test")
SUFFIXES = (".jsonl", ".csv")


@dataclass
class Split:
    """One split: texts and label ids (indices into ``Task.labels``)."""

    file: Path
    texts: list[str] = field(default_factory=list)
    label_ids: list[int] = field(default_factory=list)

    def __len__(self) -> int:
        return len(self.texts)


@dataclass
class Task:
    dir: Path
    labels: list[str]
    train: Split
    dev: Split
    test: Split

    @property
    def files(self) -> list[Path]:
        return [self.train.file, self.dev.file, self.test.file]

    @property
    def sizes(self) -> dict[str, int]:
        return {"train": len(self.train), "dev": len(self.dev), "test": len(self.test)}


def find_split_file(task_dir: Path, split: str) -> Path:
    found = [task_dir / f"{split}{s}" for s in SUFFIXES if (task_dir / f"{split}{s}").is_file()]
    if not found:
        raise InputError(f"task.dir={task_dir}: no {split}.jsonl or {split}.csv; add the {split} split "
                         f"(one example per line with a text and a label)")
    if len(found) > 1:
        raise InputError(f"task.dir={task_dir}: both {found[0].name} and {found[1].name} exist; keep only one")
    return found[0]


def _rows_jsonl(path: Path) -> list[tuple[int, dict]]:
    rows = []
    for n, line in enumerate(path.read_text(encoding="utf-8").splitlines(), start=1):
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


def _rows_csv(path: Path) -> list[tuple[int, dict]]:
    with open(path, encoding="utf-8-sig", newline="") as fh:
        reader = csv.DictReader(fh)
        # line numbers count the header as line 1
        return [(n, row) for n, row in enumerate(reader, start=2)]


def read_split(path: Path, text_field: str, label_field: str) -> list[tuple[str, str]]:
    """(text, label) pairs of one file; one clear error for a missing field or an empty value."""
    try:
        rows = _rows_jsonl(path) if path.suffix == ".jsonl" else _rows_csv(path)
    except UnicodeDecodeError as exc:
        raise InputError(f"{path}: not UTF-8 text ({exc.reason}); save it as UTF-8") from exc
    if not rows:
        raise InputError(f"{path}: no examples; add at least one line with {text_field!r} and {label_field!r}")
    pairs = []
    for n, row in rows:
        for key, name in ((text_field, "text_field"), (label_field, "label_field")):
            if key not in row or row[key] is None:
                raise InputError(f"{path}:{n}: no field {key!r}; set task.{name} to one of {sorted(row)}")
        text, label = row[text_field], row[label_field]
        if not isinstance(text, str) or not text.strip():
            raise InputError(f"{path}:{n}: field {text_field!r} is empty or not text; give every example a text")
        if isinstance(label, (dict, list)) or str(label).strip() == "":
            raise InputError(f"{path}:{n}: field {label_field!r} must be a single non-empty label, got {label!r}")
        pairs.append((text, str(label).strip()))
    return pairs


def read_task(task_dir: Path | str, text_field: str = "text", label_field: str = "label") -> Task:
    """Read and check train/dev/test of a task folder."""
    task_dir = Path(task_dir)
    if not task_dir.is_dir():
        raise InputError(f"task.dir={task_dir}: folder does not exist; give a folder with train, dev and test "
                         f"files (.jsonl or .csv)")
    files = {s: find_split_file(task_dir, s) for s in SPLITS}
    pairs = {s: read_split(files[s], text_field, label_field) for s in SPLITS}
    counts = Counter(label for _, label in pairs["train"])
    if len(counts) < 2:
        raise InputError(f"{files['train']}: only {len(counts)} class ({', '.join(counts)}); a classification task "
                         f"needs at least 2 labels in the training split")
    labels = sorted(counts)
    index = {lab: i for i, lab in enumerate(labels)}
    for s in ("dev", "test"):
        unseen = sorted({lab for _, lab in pairs[s]} - set(labels))
        if unseen:
            raise InputError(f"{files[s]}: label(s) {unseen[:5]} do not occur in {files['train'].name}; add training "
                             f"examples for them or remove them from {files[s].name}")
        missing = sorted(set(labels) - {lab for _, lab in pairs[s]})
        if missing:
            log.warning("%s has no example of label(s) %s; macro-F1 averages over the labels present in gold "
                        "or predictions",
                        files[s], missing)
    splits = {s: Split(files[s], [t for t, _ in pairs[s]], [index[lab] for _, lab in pairs[s]]) for s in SPLITS}
    log.info("task %s: %d labels, sizes %s", task_dir, len(labels), {s: len(splits[s]) for s in SPLITS})
    return Task(dir=task_dir, labels=labels, **splits)
