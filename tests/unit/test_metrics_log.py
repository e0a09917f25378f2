"""metrics.jsonl after an interrupted session: a torn last line is tolerated and dropped, and cutting back to a
checkpoint's step keeps each step once."""

from __future__ import annotations

import json

from adapt.contracts.run_folder import MetricsLog


def _log(tmp_path) -> MetricsLog:
    log = MetricsLog(tmp_path / "metrics.jsonl")
    log.write(phase="head_warmup", steps=3)
    log.write(phase="start", step=0, heldout_loss_domain=4.5)
    for step in range(1, 6):
        log.write(phase="train", step=step, loss=4.0 - step / 10)
    return log


def test_a_torn_last_line_is_skipped_when_reading(tmp_path):
    log = _log(tmp_path)
    with open(log.path, "a", encoding="utf-8") as fh:
        fh.write('{"phase": "train", "st')
    assert [r.get("step") for r in log.read()] == [None, 0, 1, 2, 3, 4, 5]
    assert log.trained_steps() == 5


def test_cut_back_keeps_the_steps_up_to_the_checkpoint_once(tmp_path):
    log = _log(tmp_path)
    log.write(phase="end", step=5, heldout_loss_domain=4.0)
    with open(log.path, "a", encoding="utf-8") as fh:
        fh.write('{"torn')
    log.cut_back(3)
    records = [json.loads(line) for line in log.path.read_text().splitlines()]  # every line parses again
    assert [(r["phase"], r.get("step")) for r in records] == [("head_warmup", None), ("start", 0), ("train", 1),
                                                             ("train", 2), ("train", 3)]
    log.write(phase="train", step=4, loss=1.0)
    assert [r["step"] for r in log.read() if r["phase"] == "train"] == [1, 2, 3, 4]


def test_a_fresh_start_clears_what_a_session_left_before_its_first_step(tmp_path):
    log = MetricsLog(tmp_path / "metrics.jsonl")
    log.write(phase="head_warmup", steps=3)
    assert log.trained_steps() == 0
    log.cut_back(None)
    assert log.read() == []
