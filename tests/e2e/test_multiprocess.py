"""Two CPU processes through torchrun run the same pretrain loop (each reads its slice of every global batch): both
ranks hold identical weights, a 2-process run resumes bit for bit, and SIGTERM (to the whole process group, or to
one rank only) stops both ranks after the same step with a checkpoint of it."""

from __future__ import annotations

import json
import os
import re
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
import torch
from safetensors.torch import load_file

from tests.e2e.test_pretrain import write_prepared

BIN = Path(sys.executable).parent
ENV = {**os.environ, "OMP_NUM_THREADS": "1", "HF_HUB_OFFLINE": "1", "TOKENIZERS_PARALLELISM": "false"}


def _torchrun(corpus: Path, encoder: Path, out: Path, *overrides: str) -> list[str]:
    # PITFALLS: `accelerate launch --cpu --num_processes 2` silently runs one process; torchrun runs two.
    return [str(BIN / "torchrun"), "--standalone", "--nproc_per_node", "2", str(BIN / "adapt-pretrain"),
            f"corpus_dir={corpus}", f"out_dir={out}", "debug=tiny", f"encoder.name_or_path={encoder}",
            "encoder.random_init=false", "runtime.device=cpu", "runtime.progress=false", "eval.pppl_max_tokens=0",
            *overrides]


def _train_steps(out: Path) -> list[int]:
    records = [json.loads(line) for line in (out / "metrics.jsonl").read_text().splitlines()]
    return [r["step"] for r in records if r["phase"] == "train"]


def _checkpoint_steps(out: Path) -> list[int]:
    return [e["step"] for e in json.loads((out / "checkpoints" / "index.json").read_text())["checkpoints"]]


@pytest.mark.slow
def test_two_processes_train_identically_write_once_and_resume_bit_for_bit(tmp_path, tiny_encoder):
    corpus = write_prepared(tmp_path / "corpus")
    straight = subprocess.Popen(_torchrun(corpus, tiny_encoder, tmp_path / "straight"), stdout=subprocess.PIPE,
                                stderr=subprocess.PIPE, text=True, env=ENV)
    first = subprocess.run(_torchrun(corpus, tiny_encoder, tmp_path / "resumed", "schedule.stop_after_steps=2"),
                           capture_output=True, text=True, timeout=600, env=ENV)
    stdout, stderr = straight.communicate(timeout=600)
    assert straight.returncode == 0, stderr[-2000:]
    assert stdout.count("pretrain: 4 steps") == 1, "only rank 0 prints the summary"
    assert "weights identical on all 2 processes at step 4" in stdout
    train = [r for r in map(json.loads, (tmp_path / "straight" / "metrics.jsonl").read_text().splitlines())
             if r["phase"] == "train"]
    assert [r["step"] for r in train] == [1, 2, 3, 4], "rank 0 alone writes metrics"
    # each step consumed 2 processes x batch 4 sequences of 64 tokens (packed, so full except the corpus tail)
    assert train[-1]["tokens_seen"] > 4 * 4 * 64
    assert first.returncode != 0 and "pretrain stopped (schedule.stop_after_steps) at step 2" in first.stdout
    second = subprocess.run(_torchrun(corpus, tiny_encoder, tmp_path / "resumed"), capture_output=True, text=True,
                            timeout=600, env=ENV)
    assert second.returncode == 0, second.stderr[-2000:]
    assert "resumed from" in second.stdout and "weights identical on all 2 processes at step 4" in second.stdout
    a = load_file(str(tmp_path / "straight" / "final" / "model.safetensors"))
    b = load_file(str(tmp_path / "resumed" / "final" / "model.safetensors"))
    assert a.keys() == b.keys() and all(torch.equal(a[k], b[k]) for k in a)
    assert _train_steps(tmp_path / "resumed") == [1, 2, 3, 4]


def _worker_pids(launcher: int) -> dict[int, int]:
    """rank -> pid of torchrun's worker processes (its children that have RANK in their environment)."""
    workers = {}
    children = Path(f"/proc/{launcher}/task/{launcher}/children").read_text().split()
    for pid in map(int, children):
        env = dict(item.split("=", 1) for item in Path(f"/proc/{pid}/environ").read_text().split("\0") if "=" in item)
        if "RANK" in env:
            workers[int(env["RANK"])] = pid
    return workers


def _signal_during_training(cmd: list[str], out: Path, target: str) -> tuple[int, str, str]:
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=ENV,
                            start_new_session=True)
    deadline = time.monotonic() + 600
    while not ((out / "metrics.jsonl").exists() and _train_steps(out)):  # training has begun
        assert proc.poll() is None and time.monotonic() < deadline, "the run ended before it could be signalled"
        time.sleep(0.05)
    if target == "group":
        os.killpg(proc.pid, signal.SIGTERM)  # what a scheduler does
    else:
        os.kill(_worker_pids(proc.pid)[1], signal.SIGTERM)  # rank 1 only: rank 0 must learn of it
    stdout, stderr = proc.communicate(timeout=120)
    return proc.returncode, stdout, stderr


@pytest.mark.slow
@pytest.mark.skipif(not Path("/proc/self/task").is_dir(), reason="finds torchrun's workers through /proc")
@pytest.mark.parametrize("target", ["group", "rank 1"])
def test_sigterm_stops_both_ranks_after_the_same_step(tmp_path, tiny_encoder, target):
    corpus = write_prepared(tmp_path / "corpus")
    out = tmp_path / "run"
    cmd = _torchrun(corpus, tiny_encoder, out, "schedule.max_steps=2000", "checkpoint.save_every_steps=0",
                    "eval.every_steps=0")
    code, stdout, stderr = _signal_during_training(cmd, out, target)
    output = stdout + stderr
    # torchrun re-raises the signal as its own SignalException (its traceback, exit 1); none passes through adapt
    assert code != 0 and not re.search(r'File ".*/adapt/', output), output[-3000:]
    print(f"\nSIGTERM to {target}: torchrun exit code {code}")
    stopped = sorted(line.split("stopped after step ")[1].split()[0] for line in output.splitlines()
                     if "stopped after step" in line)
    assert len(stopped) == 2 and stopped[0] == stopped[1], output[-3000:]
    step = int(stopped[0])
    assert _train_steps(out) == list(range(1, step + 1))
    assert _checkpoint_steps(out) == [0, step], "one checkpoint of the step both ranks stopped after"
    assert f"pretrain stopped (SIGTERM) at step {step}" in stdout or "a stop signal to another process" in stdout
