#!/usr/bin/env python3
"""Sanity check that the labelled tasks are learnable but not saturated.

    python scripts/samples/check_tasks.py [SAMPLES_DIR]

Trains TF-IDF + logistic regression on each task's train split and prints
accuracy on dev and test.  Needs scikit-learn; exits with status 1 if a test
accuracy falls outside [0.60, 0.88].
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

from sklearn.feature_extraction.text import TfidfVectorizer
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline

SAMPLES_DIR = Path(__file__).resolve().parents[2] / "corpora_samples"
LOW, HIGH = 0.60, 0.88


def load(path: Path) -> tuple[list[str], list[str]]:
    rows = [json.loads(line) for line in path.read_text(encoding="utf-8").splitlines() if line]
    return [r["text"] for r in rows], [r["label"] for r in rows]


def main(argv: list[str]) -> int:
    samples = Path(argv[0]) if argv else SAMPLES_DIR
    ok = True
    for task in ["legal", "clinical"]:
        x_train, y_train = load(samples / "tasks" / task / "train.jsonl")
        clf = make_pipeline(TfidfVectorizer(sublinear_tf=True, ngram_range=(1, 2)),
                            LogisticRegression(max_iter=2000, C=10.0))
        clf.fit(x_train, y_train)
        scores = {}
        for split in ["dev", "test"]:
            x, y = load(samples / "tasks" / task / f"{split}.jsonl")
            scores[split] = clf.score(x, y)
        print(f"{task:9s} train {len(x_train)}  dev acc {scores['dev']:.3f}  test acc {scores['test']:.3f}")
        ok &= LOW <= scores["test"] <= HIGH
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
