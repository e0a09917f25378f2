"""compare beyond one test set: the domain-gap table, label budgets, control arms, and the cost of arms that are
checkpoints of a pretrain run (with the checkpoint curve)."""

from __future__ import annotations

import json
import math
from collections import Counter

import numpy as np
import pytest
from sklearn.metrics import f1_score
from statsmodels.stats.multitest import multipletests

from adapt.config import compose_job
from adapt.stages.compare import run
from tests.conftest import build_tiny_encoder
from tests.e2e.test_compare import make_task


def _job(tmp_path, task, arms: dict, *extra: str):
    return compose_job("compare", [*[f"+arms.{a}={p}" for a, p in arms.items()], f"task.dir={task}", "debug=tiny",
                                   "runtime.progress=false", "runtime.device=cpu", "runtime.num_threads=1",
                                   f"out_dir={tmp_path / 'out'}", *extra])


def test_domain_gap_label_budget_and_control(tmp_path):
    arms = {"base": build_tiny_encoder(tmp_path / "base", seed=0),
            "adapted": build_tiny_encoder(tmp_path / "adapted", seed=1),
            "control": build_tiny_encoder(tmp_path / "control", seed=2)}
    task = make_task(tmp_path / "task")
    other = make_task(tmp_path / "other", sizes=(3, 3, 24), seed=5)  # only its test file is used
    cfg = _job(tmp_path, task, arms, f"+task.other_tests.letters={other / 'test.jsonl'}",
               "label_budgets=[0.5,1.0]", "+controls.adapted=control")
    result = run(cfg)
    doc = json.loads((tmp_path / "out" / "comparison.json").read_text())
    assert doc["task"]["sizes"]["test:letters"] == 24

    # every arm's scores on the further test set match its predictions file, recomputed with scikit-learn
    rows = [json.loads(x) for x in (tmp_path / "out" / "predictions-letters.jsonl").read_text().splitlines()]
    gold = [r["gold"] for r in rows]
    for arm, rec in doc["arms"].items():
        for k, seed_row in enumerate(rec["per_seed"]):
            pred = [r["predicted"][arm][k] for r in rows]
            assert seed_row["other_tests"]["letters"]["macro_f1"] == pytest.approx(
                f1_score(gold, pred, labels=doc["task"]["labels"], average="macro", zero_division=0))

    gap = {(r["arm"], r["test set"]): r for r in doc["domain_gap"]}
    assert set(gap) == {(a, s) for a in ("base", "adapted", "control", "tfidf") for s in ("test", "letters")}
    idx = "index (base on test = 100)"
    assert gap["base", "test"][idx] == pytest.approx(100)
    base_mean = doc["arms"]["base"]["test_macro_f1"]["mean"]
    for (arm, name), r in gap.items():
        scores = [s["test_macro_f1"] if name == "test" else s["other_tests"][name]["macro_f1"]
                  for s in doc["arms"][arm]["per_seed"]]
        assert r["macro-F1"] == pytest.approx(np.mean(scores))
        assert r[idx] == pytest.approx(100 * np.mean(scores) / base_mean)
        assert r["gap to own test index"] == pytest.approx(gap[arm, "test"][idx] - r[idx])
    adapted = gap["adapted", "letters"]
    per_seed = [a["other_tests"]["letters"]["macro_f1"] - b["other_tests"]["letters"]["macro_f1"]
                for a, b in zip(doc["arms"]["adapted"]["per_seed"], doc["arms"]["base"]["per_seed"])]
    assert adapted["difference vs base"] == pytest.approx(np.mean(per_seed))  # seeds paired, then averaged
    assert adapted["difference ci_low"] <= adapted["difference vs base"] <= adapted["difference ci_high"]
    assert gap["tfidf", "letters"]["difference vs base"] is None  # deterministic: no seed-paired test

    budget = {(r["arm"], r["share"]): r for r in doc["label_budget"]}
    assert set(budget) == {(a, s) for a in ("base", "adapted", "control", "tfidf") for s in (0.5, 1.0)}
    assert budget["base", 0.5]["mean"] != budget["base", 1.0]["mean"]  # really trained on fewer labels
    train = [json.loads(x)["label"] for x in (task / "train.jsonl").read_text().splitlines()]
    assert budget["base", 0.5]["train_examples"] == sum(math.ceil(0.5 * n) for n in Counter(train).values())
    assert budget["adapted", 1.0]["mean"] == pytest.approx(doc["arms"]["adapted"]["test_macro_f1"]["mean"])
    assert budget["adapted", 1.0]["difference"] == pytest.approx(doc["verdict"]["adapted vs base"]["difference"])
    assert budget["adapted", 0.5]["difference"] is not None

    # the control pair is one more primary test; Holm runs over all three (statsmodels' multipletests as the
    # reference implementation of Holm 1979)
    assert list(doc["tests"]) == ["adapted vs base", "control vs base", "adapted vs control"]
    assert doc["tests"]["adapted vs control"]["role"] == "control"
    p = [doc["tests"][k]["primary"]["macro_f1"]["p_value"] for k in doc["tests"]]
    expected = multipletests(p, method="holm")[1]
    assert [doc["verdict"][k]["p_adjusted"] for k in doc["tests"]] == pytest.approx(expected)
    assert doc["verdict"]["adapted vs control"]["text"].startswith("domain effect beyond")
    text = "\n".join(result["summary"])
    assert "domain gap (macro-F1, index: base on test = 100):" in text and "adapted on letters:" in text
    assert "label budget" in text and "0.5 of train" in text
    md = (tmp_path / "out" / "comparison.md").read_text()
    assert "## Domain gap" in md and "## Label budget" in md


def test_cost_and_checkpoint_curve_from_a_pretrain_run(tmp_path, tiny_encoder_headless):
    from adapt.stages.pretrain import run as pretrain
    from tests.e2e.test_pretrain import tiny_cfg

    pretrain(tiny_cfg(tmp_path, tiny_encoder_headless, "run", "checkpoint.save_every_steps=2",
                      "checkpoint.keep_last=2"))
    records = [json.loads(x) for x in (tmp_path / "run" / "metrics.jsonl").read_text().splitlines()]
    tokens = {r["step"]: r["tokens_seen"] for r in records if r["phase"] == "train"}
    run_dir = tmp_path / "run"
    cfg = _job(tmp_path, make_task(tmp_path / "task"), {"base": tiny_encoder_headless,
                                                       "early": run_dir / "checkpoints" / "step-2",
                                                       "final": run_dir})
    result = run(cfg)
    cost = result["comparison"]["cost"]
    by_arm = {a["arm"]: a for a in cost["arms"]}
    assert set(by_arm) == {"early", "final"}  # the base encoder is no pretrain run: no cost
    assert by_arm["early"]["step"] == 2 and by_arm["early"]["tokens_seen"] == tokens[2]
    assert by_arm["final"]["step"] == max(tokens) and by_arm["final"]["tokens_seen"] == tokens[max(tokens)]
    # manifest and metrics times have one-second resolution: a tiny run may reach step 2 within its first second
    assert 0 <= by_arm["early"]["wall_seconds"] <= by_arm["final"]["wall_seconds"]
    verdict = result["comparison"]["verdict"]["final vs base"]
    hours = by_arm["final"]["wall_seconds"] / 3600
    if hours > 0:
        assert by_arm["final"]["gain_per_hour"] == pytest.approx(verdict["difference"] / hours)
        assert by_arm["final"]["gain_per_hour_ci_low"] == pytest.approx(verdict["ci_low"] / hours)
    else:
        assert by_arm["final"]["gain_per_hour"] is None
    (curve,) = cost["curves"]
    assert [p["arm"] for p in curve["points"]] == ["early", "final"] and len(curve["step_differences"]) == 1
    assert curve["recommendation"].split(":")[0] in ("stop", "continue", "not worth it")
    assert any(line.startswith("cost: final took") for line in result["summary"])
    assert any(line.startswith("checkpoints of ") for line in result["summary"])

    from adapt.stages.report import run as report

    made = report(compose_job("report", [f"compare_dir={tmp_path / 'out'}", f"pretrain_dir={run_dir}",
                                         f"out_dir={tmp_path / 'report'}"]))
    md = open(made["markdown"], encoding="utf-8").read()
    assert "Cost of each adapted arm" in md and curve["recommendation"] in md
