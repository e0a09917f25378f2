"""The compare job end to end on a tiny multi-label task (several labels per example) with tiny random encoders."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
from sklearn.metrics import accuracy_score, f1_score
from sklearn.preprocessing import MultiLabelBinarizer

from adapt.config import compose_job
from adapt.evaluation.finetune import THRESHOLDS
from adapt.stages.compare import run
from tests.e2e.test_compare import CLINICAL, FILLER, LEGAL
from tests.conftest import build_tiny_encoder

POOLS = {"clinical": CLINICAL, "legal": LEGAL, "tenancy": ["tenant", "landlord", "rent", "notice"]}


def make_multilabel_task(folder: Path, sizes=(40, 20, 30), seed: int = 0) -> Path:
    """Examples carry one or two of three labels (words of each label's pool); a few carry none."""
    rng = np.random.default_rng(seed)
    folder.mkdir(parents=True, exist_ok=True)
    names = list(POOLS)
    for split, n in zip(("train", "dev", "test", "other"), (*sizes, 12)):
        lines = []
        for i in range(n):
            labels = [names[i % 3]] + ([names[(i + 1) % 3]] if i % 2 else [])
            labels = [] if i % 10 == 9 else labels
            words = [w for lab in labels for w in rng.choice(POOLS[lab], 2)] + list(rng.choice(FILLER, 3))
            rng.shuffle(words)
            # a one-label example is written as a plain string: scalars count as one-label lists
            label = labels[0] if len(labels) == 1 and i % 4 == 0 else labels
            lines.append(json.dumps({"text": " ".join(words), "label": label}))
        (folder / f"{split}.jsonl").write_text("\n".join(lines) + "\n", encoding="utf-8")
    return folder


def test_compare_multilabel_end_to_end(tmp_path):
    base = build_tiny_encoder(tmp_path / "base", seed=0)
    adapted = build_tiny_encoder(tmp_path / "adapted", seed=1)
    task = make_multilabel_task(tmp_path / "task")
    out = tmp_path / "out"
    # 3 epochs at a high rate so that the tiny encoders learn something and the arms differ; a further test set
    # and a label budget run through the domain-gap and learning-curve paths
    result = run(compose_job("compare", [f"+arms.base={base}", f"+arms.adapted={adapted}", f"task.dir={task}",
                                         "debug=tiny", "finetune.epochs=3", "finetune.learning_rate=3e-3",
                                         "+task.other_tests.other=other.jsonl", "label_budgets=[0.5,1.0]",
                                         "runtime.progress=false", "runtime.device=cpu", "runtime.num_threads=1",
                                         f"out_dir={out}"]))
    doc = json.loads((out / "comparison.json").read_text())
    assert doc["task"]["multi_label"] is True and "threshold_rule" in doc["task"]
    assert doc["task"]["labels"] == ["clinical", "legal", "tenancy"]
    rows = [json.loads(x) for x in (out / "predictions.jsonl").read_text().splitlines()]
    assert len(rows) == 30 and all(isinstance(r["gold"], list) for r in rows)
    # reference: scikit-learn on label-indicator matrices -- f1_score(average="macro"/"micro", zero_division=0)
    # and accuracy_score (exact-match "subset accuracy" for multilabel input), scikit-learn user guide,
    # "Model evaluation", accuracy score and "Precision, recall and F-measures" (multiclass and multilabel)
    mlb = MultiLabelBinarizer(classes=doc["task"]["labels"])
    gold = mlb.fit_transform([r["gold"] for r in rows])
    for arm in ("base", "adapted", "tfidf"):
        for k, seed_row in enumerate(doc["arms"][arm]["per_seed"]):
            pred = mlb.transform([r["predicted"][arm][k] for r in rows])
            assert seed_row["test_macro_f1"] == f1_score(gold, pred, average="macro", zero_division=0)
            assert seed_row["test_micro_f1"] == f1_score(gold, pred, average="micro", zero_division=0)
            assert seed_row["test_accuracy"] == accuracy_score(gold, pred)
            per_label = f1_score(gold, pred, average=None, zero_division=0).tolist()
            assert list(seed_row["test_per_label_f1"].values()) == per_label
            assert seed_row["threshold"] in THRESHOLDS
            if arm != "tfidf":  # the selected epoch's dev threshold is the one applied to test
                history = doc["arms"][arm]["history"][k]
                assert seed_row["threshold"] == history[seed_row["selected_epoch"] - 1]["threshold"]
    pair = doc["tests"]["adapted vs base"]
    assert pair["n_examples"] == 30 and pair["n_seeds"] == 2
    # McNemar counts exact-match correctness: an example is right only when its whole label set is
    exact = {arm: np.array([[r["predicted"][arm][k] == r["gold"] for r in rows] for k in range(2)])
             for arm in ("adapted", "base")}
    for k, mc in enumerate(pair["mcnemar_per_seed"]):
        assert mc["only_a_correct"] == int((exact["adapted"][k] & ~exact["base"][k]).sum())
        assert mc["only_b_correct"] == int((~exact["adapted"][k] & exact["base"][k]).sum())
    other = [json.loads(x) for x in (out / "predictions-other.jsonl").read_text().splitlines()]
    for k, seed_row in enumerate(doc["arms"]["adapted"]["per_seed"]):
        pred = mlb.transform([r["predicted"]["adapted"][k] for r in other])
        assert seed_row["other_tests"]["other"]["macro_f1"] == f1_score(
            mlb.transform([r["gold"] for r in other]), pred, average="macro", zero_division=0)
    assert {r["test set"] for r in doc["domain_gap"]} == {"test", "other"}
    assert {r["share"] for r in doc["label_budget"]} == {0.5, 1.0}
    md = (out / "comparison.md").read_text()
    assert "Multi-label task" in md and "0.05, 0.10, ..., 0.95" in md
    assert any(line.startswith("verdict: ") for line in result["summary"])
