"""Overlap between labelled task texts (above all the test split) and corpus documents.

Task texts are short and may sit inside a longer corpus document, so the measure is containment: the share of a
task text's word n-grams that occur in the document (Broder 1997 defines containment next to resemblance). A
task text shorter than n words overlaps when its whole word sequence occurs in the document.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from adapt.common.errors import InputError
from adapt.config.prepare import TASK_SPLITS, ContaminationConfig
from adapt.contracts.labelled_task import FORMAT_NAMES, find_split_files, read_labelled_file
from adapt.corpus.cleaning import fold_text
from adapt.corpus.minhash import Shingler


@dataclass
class TaskText:
    split: str
    id: str
    text: str


def load_task_texts(task_dir: Path, text_field: str) -> list[TaskText]:
    """Texts of the split files of ``task_dir`` that exist, found and read exactly as the compare job does."""
    key = "contamination.task_dir"
    files = find_split_files(task_dir, key, required=False)
    if not files:
        raise InputError(f"{key}={task_dir}: no train/dev/test file ({FORMAT_NAMES}); check {key}, or set "
                         f"{key}=null to skip the check")
    texts: list[TaskText] = []
    for split, f in files.items():
        for i, ex in enumerate(read_labelled_file(f, text_field, key_prefix="contamination")):
            texts.append(TaskText(split, ex.id if ex.id is not None else f"{split}:{i}", ex.text))
    return texts


@dataclass
class TaskIndex:
    """Sorted n-gram ids of all task texts with the text each belongs to."""

    texts: list[TaskText]
    ngram_words: int
    seed: int
    ids_: np.ndarray = field(default_factory=lambda: np.empty(0, np.uint64))
    owner_: np.ndarray = field(default_factory=lambda: np.empty(0, np.int64))
    size_: np.ndarray = field(default_factory=lambda: np.empty(0, np.int64))
    short_: dict[int, str] = field(default_factory=dict)  # task index -> normalised word string

    def build(self) -> "TaskIndex":
        shingler = Shingler(self.ngram_words, self.seed)
        ids, owner, sizes = [], [], []
        for i, t in enumerate(self.texts):
            words, _ = shingler.word_hashes([t.text])
            if words.size < self.ngram_words:
                self.short_[i] = fold_text(t.text)
                sizes.append(0)
                continue
            s = shingler.shingles(t.text)
            ids.append(s)
            owner.append(np.full(s.size, i, dtype=np.int64))
            sizes.append(s.size)
        if ids:
            all_ids, all_owner = np.concatenate(ids), np.concatenate(owner)
            order = np.argsort(all_ids, kind="stable")
            self.ids_, self.owner_ = all_ids[order], all_owner[order]
        self.size_ = np.array(sizes, dtype=np.int64)
        return self


@dataclass
class Overlap:
    task: int  # index into TaskIndex.texts
    containment: float


def find_overlaps(text: str, index: TaskIndex, shingler: Shingler, min_containment: float) -> list[Overlap]:
    """Task texts whose n-grams are at least ``min_containment`` contained in ``text``."""
    found: list[Overlap] = []
    if index.ids_.size:
        doc = shingler.shingles(text)
        lo = np.searchsorted(index.ids_, doc, side="left")
        hi = np.searchsorted(index.ids_, doc, side="right")
        hit = np.flatnonzero(hi > lo)
        if hit.size:
            owners = np.concatenate([index.owner_[lo[i]:hi[i]] for i in hit])
            hits = np.bincount(owners, minlength=index.size_.size)
            share = hits / np.maximum(index.size_, 1)
            found += [Overlap(int(i), float(share[i])) for i in np.flatnonzero(share >= min_containment)]
    if index.short_:
        flat = fold_text(text)
        found += [Overlap(i, 1.0) for i, s in index.short_.items() if s and s in flat]
    return found


def contamination_summary(index: TaskIndex, doc_hits: dict[int, list[str]], removed_docs: int,
                          cfg: ContaminationConfig) -> dict:
    """Per split: task texts, how many were found in the corpus and in how many documents."""
    per_split = {}
    for split in TASK_SPLITS:
        members = [i for i, t in enumerate(index.texts) if t.split == split]
        if not members:
            continue
        found = [i for i in members if doc_hits.get(i)]
        per_split[split] = {"task_texts": len(members), "found_in_corpus": len(found),
                            "found_share": len(found) / len(members),
                            "corpus_docs": len({d for i in found for d in doc_hits[i]}),
                            "examples": [{"task_id": index.texts[i].id, "doc_ids": doc_hits[i][:3]}
                                         for i in found[:5]]}
    return {"task_dir": cfg.task_dir, "ngram_words": cfg.ngram_words, "min_containment": cfg.min_containment,
            "action": cfg.action, "remove_splits": list(cfg.remove_splits), "removed_docs": removed_docs,
            "splits": per_split}
