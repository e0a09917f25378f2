"""SIGTERM in every phase of a pretrain run: it stops at the next safe point, saves what a restart needs and says
how to resume; the same command then finishes it, with the weights of an uninterrupted run. Through the console
script a stopped run exits 75.

One phase function sends this process SIGTERM when it is entered (deterministic, unlike a timed kill). The stage
handles SIGTERM from the start of ``run`` to its end, so the signal never reaches the test runner's handler. The
console script's exit code after a signal is checked in test_pretrain_cli.py."""

from __future__ import annotations

import json
import os
import signal
from pathlib import Path

import pytest
import torch
from safetensors.torch import load_file

import adapt.stages.pretrain as stage
from tests.conftest import build_tiny_encoder
from tests.e2e.test_pretrain import tiny_cfg

# phase -> (function of adapt.stages.pretrain that signals when entered, on which call)
PHASES = {
    "tokenise": ("load_run_data", 1),
    "warm_up": ("warm_up_missing_head", 1),
    "base": ("measure_base", 1),
    "train": ("_optimizer_step", 3),
    "final_eval": ("_finish", 1),
    "export": ("write_model_card", 1),
}
EXPECTED = {  # phase -> (completed, checkpoint steps on disk afterwards, final/ and result.json written)
    "tokenise": (False, [], False),
    "warm_up": (False, [], False),
    "base": (False, [0], False),
    "train": (False, [2, 3], False),
    "final_eval": (False, [2, 4], False),
    "export": (True, [2, 4], True),  # the export finishes: the run is complete, so it is not reported as stopped
}
def _cfg(tmp_path: Path, encoder: Path, out: str):
    return tiny_cfg(tmp_path, encoder, out, "eval.pppl_max_tokens=32")


def _signal_on_call(monkeypatch, name: str, on_call: int) -> None:
    """Make ``adapt.stages.pretrain.<name>`` send this process SIGTERM when it is entered the ``on_call``-th time."""
    original, calls = getattr(stage, name), []

    def signalled(*args, **kwargs):
        calls.append(1)
        if len(calls) == on_call:
            os.kill(os.getpid(), signal.SIGTERM)
        return original(*args, **kwargs)

    monkeypatch.setattr(stage, name, signalled)


def _steps(out: Path) -> list[int]:
    index = out / "checkpoints" / "index.json"
    return [e["step"] for e in json.loads(index.read_text())["checkpoints"]] if index.exists() else []


@pytest.fixture(scope="module")
def uninterrupted(tmp_path_factory) -> tuple[Path, dict]:
    """The headless encoder (so that the warm-up phase runs) and the final weights of a straight run."""
    root = tmp_path_factory.mktemp("uninterrupted")
    encoder = build_tiny_encoder(root / "encoder", with_head=False)
    before = torch.get_num_threads()
    stage.run(_cfg(root, encoder, "run"))
    torch.set_num_threads(before)
    return encoder, load_file(str(root / "run" / "final" / "model.safetensors"))


@pytest.mark.parametrize("phase", list(PHASES))
def test_sigterm_in_each_phase_stops_cleanly_and_a_restart_finishes(tmp_path, uninterrupted, phase, monkeypatch):
    encoder, straight = uninterrupted
    _signal_on_call(monkeypatch, *PHASES[phase])
    result = stage.run(_cfg(tmp_path, encoder, "run"))
    monkeypatch.undo()
    out = tmp_path / "run"
    completed, expected_steps, final_written = EXPECTED[phase]
    assert result["completed"] is completed
    assert (_steps(out), (out / "final").exists(), (out / "result.json").exists()) == \
        (expected_steps, final_written, final_written)
    if not completed:
        assert result["stopped_by"] == "SIGTERM"
        assert "pretrain stopped (SIGTERM)" in result["summary"][0] and "run the same command again" in \
            result["summary"][1], result["summary"]
        assert json.loads((out / "manifest.json").read_text())["status"] == "stopped"
    assert stage.run(_cfg(tmp_path, encoder, "run"))["completed"]
    b = load_file(str(out / "final" / "model.safetensors"))
    assert straight.keys() == b.keys() and all(torch.equal(straight[k], b[k]) for k in b), \
        "must end where a straight run ends"
    records = [json.loads(line) for line in (out / "metrics.jsonl").read_text().splitlines()]
    assert [r["step"] for r in records if r["phase"] == "train"] == [1, 2, 3, 4]
    assert [r["phase"] for r in records].count("end") == 1
