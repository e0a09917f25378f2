"""The compare job end to end on a tiny task with two tiny random encoders; CLI error handling."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from sklearn.metrics import accuracy_score, f1_score

from adapt.stages.compare import run
from adapt.config import compose_job
from adapt.common.errors import ConfigError, InputError
from tests.conftest import TINY_WORDS, build_tiny_encoder

LEGAL = "court tenant landlord notice contract clause appeal judgment claim rent".split()
CLINICAL = "patient ward dose nurse scan report".split()
FILLER = [w for w in TINY_WORDS if w not in LEGAL + CLINICAL]


def make_task(folder: Path, sizes=(40, 20, 30), seed: int = 0) -> Path:
    """Three labels from the tiny vocabulary: legal words, clinical words, or both mixed."""
    rng = np.random.default_rng(seed)
    folder.mkdir(parents=True, exist_ok=True)
    pools = {"legal": LEGAL, "clinical": CLINICAL, "mixed": LEGAL + CLINICAL}
    for split, n in zip(("train", "dev", "test"), sizes):
        lines = []
        for i in range(n):
            label = list(pools)[i % 3]
            words = list(rng.choice(pools[label], 3)) + list(rng.choice(FILLER, 3))
            rng.shuffle(words)
            lines.append(json.dumps({"text": " ".join(words), "label": label}))
        (folder / f"{split}.jsonl").write_text("\n".join(lines) + "\n", encoding="utf-8")
    return folder


def _job(tmp_path: Path, out: str, base: Path, adapted: Path, task: Path):
    return compose_job("compare", [f"+arms.base={base}", f"+arms.adapted={adapted}", f"task.dir={task}",
                                   "debug=tiny", "runtime.progress=false", "runtime.device=cpu",
                                   "runtime.num_threads=1", f"out_dir={tmp_path / out}"])


def test_compare_end_to_end_and_deterministic(tmp_path):
    base = build_tiny_encoder(tmp_path / "base", seed=0)
    adapted = build_tiny_encoder(tmp_path / "adapted", seed=1)
    task = make_task(tmp_path / "task")
    cfg = _job(tmp_path, "out1", base, adapted, task)
    result = run(cfg)
    out = tmp_path / "out1"
    doc = json.loads((out / "comparison.json").read_text())
    assert set(doc) >= {"task", "arms", "tests", "verdict"}
    assert doc["task"]["labels"] == ["clinical", "legal", "mixed"]
    assert doc["task"]["sizes"] == {"train": 40, "dev": 20, "test": 30}
    assert list(doc["arms"]) == ["base", "adapted", "tfidf"]
    for arm in ("base", "adapted"):
        rec = doc["arms"][arm]
        assert [r["seed"] for r in rec["per_seed"]] == [0, 1]
        assert set(rec["per_seed"][0]) >= {"seed", "dev_accuracy", "dev_macro_f1", "test_accuracy", "test_macro_f1",
                                          "epochs_run", "seconds"}
        assert rec["per_seed"][0]["epochs_run"] == 1
        assert rec["test_accuracy"]["mean"] == np.mean([r["test_accuracy"] for r in rec["per_seed"]])
    pair = doc["tests"]["adapted vs base"]
    assert set(pair) >= {"primary", "bootstrap", "permutation", "mcnemar_majority_vote", "mcnemar_per_seed"}
    assert "McNemar" not in json.dumps(doc["verdict"])  # it tests majority-vote accuracy, not the verdict
    verdict = doc["verdict"]["adapted vs base"]
    assert verdict["outcome"] in ("adapted better", "adapted worse", "no detectable difference")
    assert verdict["ci_low"] <= verdict["difference"] <= verdict["ci_high"]

    # predictions.jsonl agrees with the reported metrics (recomputed with scikit-learn)
    rows = [json.loads(x) for x in (out / "predictions.jsonl").read_text().splitlines()]
    assert len(rows) == 30
    gold = [r["gold"] for r in rows]
    for k, seed_row in enumerate(doc["arms"]["adapted"]["per_seed"]):
        pred = [r["predicted"]["adapted"][k] for r in rows]
        assert seed_row["test_accuracy"] == accuracy_score(gold, pred)
        assert seed_row["test_macro_f1"] == f1_score(gold, pred, average="macro")

    md = (out / "comparison.md").read_text()
    assert "not legal or medical advice" in md and "adapted vs base" in md
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["status"] == "completed" and manifest["job"] == "compare"
    assert any(line.startswith("base ") and "(2 seeds)" in line for line in result["summary"])
    assert any(line.startswith("verdict: ") for line in result["summary"])

    # same seeds -> identical results
    again = run(_job(tmp_path, "out2", base, adapted, task))["comparison"]
    for arm in ("base", "adapted", "tfidf"):
        strip = [{k: v for k, v in r.items() if k != "seconds"} for r in doc["arms"][arm]["per_seed"]]
        assert strip == [{k: v for k, v in r.items() if k != "seconds"} for r in again["arms"][arm]["per_seed"]]
    assert again["tests"] == json.loads(json.dumps(doc["tests"]))
    assert (tmp_path / "out2" / "predictions.jsonl").read_text() == (out / "predictions.jsonl").read_text()


def test_bad_arm_folder_fails_before_any_training(tmp_path):
    base = build_tiny_encoder(tmp_path / "base")
    cfg = _job(tmp_path, "out", base, tmp_path / "missing", make_task(tmp_path / "task"))
    with pytest.raises(InputError, match=r"arms\.adapted=.*folder does not exist"):
        run(cfg)
    assert not (tmp_path / "out" / "comparison.json").exists()


def test_cli_missing_task_folder_is_one_line_exit_2(tmp_path):
    base = build_tiny_encoder(tmp_path / "base")
    script = Path(sys.executable).parent / "adapt-compare"
    env = {**os.environ, "HF_HUB_OFFLINE": "1"}
    proc = subprocess.run([str(script), f"+arms.base={base}", f"task.dir={tmp_path / 'no-such-task'}",
                           f"out_dir={tmp_path / 'out'}", "runtime.progress=false"],
                          capture_output=True, text=True, env=env, timeout=120)
    assert proc.returncode == 2
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1, proc.stderr
    assert "no-such-task" in lines[0] and "does not exist" in lines[0]


def test_bad_compare_values_are_all_reported_at_once(tmp_path):
    with pytest.raises(ConfigError) as err:
        compose_job("compare", ["+arms.base=x", "+arms.tfidf=y", "reference_arm=nope", f"task.dir={tmp_path}",
                                "finetune.select_epoch=middle", "significance.primary_metric=auc",
                                "significance.confidence=1.5", "tfidf_c_values=[0,1]"])
    message = str(err.value)
    for key in ("reference_arm='nope'", "arms.tfidf", "finetune.select_epoch='middle'",
                "significance.primary_metric='auc'", "significance.confidence=1.5", "tfidf_c_values=[0.0, 1.0]"):
        assert key in message
    assert "\n" not in message
