"""Overlap of task texts with corpus documents, by n-gram containment."""

from __future__ import annotations

import json
import random

import pytest

from adapt.corpus.contamination import TaskIndex, TaskText, find_overlaps, load_task_texts
from adapt.corpus.minhash import Shingler
from adapt.common.errors import InputError

VOCAB = [f"v{i}" for i in range(2000)]


def _text(rng: random.Random, n: int) -> str:
    return " ".join(rng.choice(VOCAB) for _ in range(n))


def test_task_text_inside_a_longer_document_is_found_even_with_small_edits():
    rng = random.Random(0)
    tasks = [TaskText("test", f"t{i}", _text(rng, rng.randint(25, 60))) for i in range(30)]
    tasks.append(TaskText("dev", "short", "v1 v2 v3"))  # shorter than n words: whole-sequence match
    index = TaskIndex(tasks, ngram_words=5, seed=0).build()
    sh = Shingler(5, 0)
    words = tasks[3].text.split()
    words[len(words) // 2] = "changed"  # one word edited: 5 of ~40 five-grams lost
    doc = _text(rng, 150) + " " + " ".join(words) + " " + _text(rng, 150)
    hits = find_overlaps(doc, index, sh, min_containment=0.5)
    assert [h.task for h in hits] == [3]
    assert 0.75 < hits[0].containment < 1.0
    # containment = |task n-grams found in the document| / |task n-grams| (Broder 1997), checked by hand
    task_ngrams = set(sh.shingles(tasks[3].text).tolist())
    doc_ngrams = set(sh.shingles(doc).tolist())
    assert hits[0].containment == pytest.approx(len(task_ngrams & doc_ngrams) / len(task_ngrams))
    assert find_overlaps(_text(rng, 300), index, sh, 0.5) == []
    assert [h.task for h in find_overlaps("intro V1  v2 v3 outro", index, sh, 0.5)] == [30]


def test_task_files_are_read_per_split(tmp_path):
    for split in ("train", "dev", "test"):
        rows = [{"id": f"{split}{i}", "text": f"{split} text {i}", "label": "a"} for i in range(3)]
        (tmp_path / f"{split}.jsonl").write_text("\n".join(json.dumps(r) for r in rows) + "\n")
    (tmp_path / "notes.txt").write_text("ignored")
    texts = load_task_texts(tmp_path, "text")
    assert sorted({t.split for t in texts}) == ["dev", "test", "train"] and len(texts) == 9
    with pytest.raises(InputError, match="train.jsonl:1: no field 'sentence'.*contamination.text_field"):
        load_task_texts(tmp_path, "sentence")
    empty = tmp_path / "empty"
    empty.mkdir()
    with pytest.raises(InputError, match="no train/dev/test"):
        load_task_texts(empty, "text")
    with pytest.raises(InputError, match="folder does not exist"):
        load_task_texts(tmp_path / "missing", "text")
