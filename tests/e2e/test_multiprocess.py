"""Two CPU processes through torchrun run the same pretrain loop (each reads its slice of every global batch)."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from tests.e2e.test_pretrain import write_prepared


@pytest.mark.slow
def test_two_processes_train_and_write_once(tmp_path, tiny_encoder):
    corpus = write_prepared(tmp_path / "corpus")
    bin_dir = Path(sys.executable).parent
    # PITFALLS: `accelerate launch --cpu --num_processes 2` silently runs one process; torchrun runs two.
    cmd = [str(bin_dir / "torchrun"), "--standalone", "--nproc_per_node", "2", str(bin_dir / "adapt-pretrain"),
           f"corpus_dir={corpus}", f"out_dir={tmp_path / 'run'}", "debug=tiny", f"encoder.name_or_path={tiny_encoder}",
           "encoder.random_init=false", "runtime.device=cpu", "runtime.progress=false", "eval.pppl_max_tokens=0"]
    env = {**os.environ, "OMP_NUM_THREADS": "1"}
    proc = subprocess.run(cmd, capture_output=True, text=True, timeout=300, env=env)
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert proc.stdout.count("pretrain: 4 steps") == 1, "only rank 0 prints the summary"
    records = [json.loads(l) for l in (tmp_path / "run" / "metrics.jsonl").read_text().splitlines()]
    train = [r for r in records if r["phase"] == "train"]
    assert [r["step"] for r in train] == [1, 2, 3, 4], "rank 0 alone writes metrics"
    # each step consumed 2 processes x batch 4 sequences of 64 tokens (packed, so full except the corpus tail)
    assert train[-1]["tokens_seen"] > 4 * 4 * 64
    assert (tmp_path / "run" / "final" / "model.safetensors").exists()
