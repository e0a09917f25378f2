"""Label-budget subsets, run-folder session time, the checkpoint recommendation, extra test sets in a task."""

from __future__ import annotations

import json
import math
from collections import Counter

import numpy as np
import pytest
from sklearn.model_selection import train_test_split

from adapt.common.errors import InputError
from adapt.contracts.labelled_task import read_task
from adapt.contracts.manifest import session_seconds
from adapt.evaluation.adaptation_cost import gain_per_hour, recommend
from adapt.evaluation.label_budget import budget_subsets


def test_budget_subsets_are_nested_stratified_and_seeded():
    rng = np.random.default_rng(0)
    labels = rng.choice(4, size=400, p=[0.55, 0.25, 0.15, 0.05]).tolist()
    shares = [0.1, 0.25, 0.5, 1.0]
    subsets = budget_subsets(labels, shares, seed=3)
    assert subsets == budget_subsets(labels, shares, seed=3)  # the same for every arm and seed
    assert subsets[0.1] != budget_subsets(labels, shares, seed=4)[0.1]
    assert subsets[1.0] == list(range(400))
    for small, large in zip(shares, shares[1:]):
        assert set(subsets[small]) <= set(subsets[large])  # nested
    full = Counter(labels)
    for share in shares[:-1]:
        got = Counter(labels[i] for i in subsets[share])
        assert set(got) == set(full)  # every label kept
        # per-class sizes agree, within one example, with scikit-learn's stratified split of the same size
        # (train_test_split(stratify=...), scikit-learn user guide 3.1.2.2 "stratified" splitting)
        rows, _ = train_test_split(np.arange(400), train_size=sum(got.values()), stratify=labels, random_state=0)
        ref = Counter(labels[i] for i in rows)
        assert all(abs(got[c] - ref[c]) <= 1 for c in full), (share, got, ref)
        assert all(got[c] == max(1, math.ceil(share * full[c])) for c in full)


def test_budget_keeps_a_rare_label_at_a_tiny_share():
    labels = [0] * 50 + [1] * 2
    assert Counter(labels[i] for i in budget_subsets(labels, [0.1], seed=0)[0.1]) == {0: 5, 1: 1}


def test_session_seconds_sum_sessions_and_stop_at_a_time():
    manifest = {"sessions": [{"started": "2026-01-01T10:00:00+00:00", "ended": "2026-01-01T10:10:00+00:00"},
                             {"started": "2026-01-01T12:00:00+00:00", "ended": "2026-01-01T12:30:00+00:00"}]}
    assert session_seconds(manifest) == 2400
    assert session_seconds(manifest, until="2026-01-01T10:05:00+00:00") == 300  # the second session is after
    assert session_seconds(manifest, until="2026-01-01T12:06:00+00:00") == 600 + 360
    assert session_seconds({"sessions": [{"started": "2026-01-01T10:00:00+00:00"}]}) is None  # never ended


def _p(lo: float) -> dict:
    return {"difference": lo + 0.01, "ci_low": lo, "ci_high": lo + 0.02}


def test_recommendation_follows_the_intervals():
    def points(*lows):
        return [{"step": 100 * (i + 1), "vs_reference": _p(lo)} for i, lo in enumerate(lows)]

    assert recommend(points(-0.02, -0.01), [_p(0.0)]).startswith("not worth it")
    assert recommend(points(0.01, 0.03), [_p(0.005)]).startswith("continue")
    stop = recommend(points(-0.01, 0.01, 0.012), [_p(0.004), _p(-0.01)])
    assert stop.startswith("stop") and "from step 200" in stop


def test_gain_per_hour_scales_the_interval():
    g = gain_per_hour({"wall_seconds": 1800}, {"difference": 0.02, "ci_low": -0.01, "ci_high": 0.05})
    assert g == pytest.approx({"difference": 0.04, "ci_low": -0.02, "ci_high": 0.1})
    assert gain_per_hour({"wall_seconds": None}, {"difference": 0.02, "ci_low": 0, "ci_high": 0.05})["difference"] is None


def _write(path, rows):
    path.write_text("".join(json.dumps({"text": t, "label": lab}) + "\n" for t, lab in rows), encoding="utf-8")


def test_other_test_sets_are_read_and_checked_like_test(tmp_path):
    rows = [("the tenant paid", "a"), ("the nurse gave", "b")] * 3
    for split in ("train", "dev", "test"):
        _write(tmp_path / f"{split}.jsonl", rows)
    _write(tmp_path / "letters.jsonl", rows[:2])
    task = read_task(tmp_path, other_tests={"letters": "letters.jsonl"})
    assert list(task.other_tests) == ["letters"] and task.other_tests["letters"].label_ids == [0, 1]
    assert task.sizes["test:letters"] == 2 and tmp_path / "letters.jsonl" in task.files
    _write(tmp_path / "bad.jsonl", [("the judge said", "c"), ("x", "a"), ("y", "b")])
    with pytest.raises(InputError, match=r"bad.jsonl: label\(s\) \['c'\] do not occur in train.jsonl"):
        read_task(tmp_path, other_tests={"bad": "bad.jsonl"})
    _write(tmp_path / "one.jsonl", [("x", "a")])
    with pytest.raises(InputError, match="one.jsonl: no example of label 'b'"):
        read_task(tmp_path, other_tests={"one": "one.jsonl"})
    with pytest.raises(InputError, match="task.other_tests.gone=gone.jsonl: file does not exist"):
        read_task(tmp_path, other_tests={"gone": "gone.jsonl"})
