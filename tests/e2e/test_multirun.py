"""Hydra multirun (`-m`): every sweep job gets its own complete run folder, and every job is checked first."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

from tests.e2e.test_pretrain import write_prepared

PRETRAIN = Path(sys.executable).parent / "adapt-pretrain"
DEMO = Path(sys.executable).parent / "adapt-demo"


def _run(exe: Path, *args: str) -> subprocess.CompletedProcess:
    return subprocess.run([str(exe), *args], capture_output=True, text=True, timeout=300,
                          env={**os.environ, "HF_HUB_OFFLINE": "1"})


def _tiny_pretrain_args(tmp_path: Path, encoder: Path) -> list[str]:
    corpus = write_prepared(tmp_path / "corpus")
    return ["debug=tiny", f"corpus_dir={corpus}", f"out_dir={tmp_path / 'sweep'}",
            f"encoder.name_or_path={encoder}", "encoder.random_init=false", "runtime.progress=false",
            "eval.pppl_max_tokens=0"]


def _one_error_line(proc: subprocess.CompletedProcess) -> str:
    assert proc.returncode == 2, proc.stderr[-2000:]
    assert "Traceback" not in proc.stderr, proc.stderr[-2000:]
    lines = [line for line in proc.stderr.splitlines() if line.strip()]
    assert len(lines) == 1 and lines[0].startswith("error: "), proc.stderr[-2000:]
    return lines[0]


def test_sweep_of_two_values_makes_two_complete_runs(tmp_path, tiny_encoder):
    proc = _run(PRETRAIN, "-m", "masking.rate=0.15,0.3", *_tiny_pretrain_args(tmp_path, tiny_encoder))
    assert proc.returncode == 0, proc.stderr[-3000:]
    runs = sorted(p.parent for p in (tmp_path / "sweep").rglob("manifest.json"))
    assert len(runs) == 2 and runs[0] != runs[1], runs
    rates = set()
    for run in runs:
        manifest = json.loads((run / "manifest.json").read_text())
        assert manifest["status"] == "completed"
        assert Path(manifest["config"]["out_dir"]).resolve() == run.resolve(), "the stage must write where it says"
        rate = manifest["config"]["masking"]["rate"]
        assert manifest["launch"]["swept"] == [f"masking.rate={rate}"], manifest["launch"]
        rates.add(rate)
        assert (run / "final" / "model.safetensors").exists()
        # the tiny preset trains 4 steps; a job that resumed another job's finished run would train none
        train_steps = [json.loads(line)["step"] for line in (run / "metrics.jsonl").read_text().splitlines()
                       if json.loads(line)["phase"] == "train"]
        assert train_steps == [1, 2, 3, 4], (run, train_steps)
        result = json.loads((run / "result.json").read_text())
        assert result["completed"] and result["step"] == 4
    assert rates == {0.15, 0.3}


def test_sweep_with_one_bad_value_starts_no_job(tmp_path, tiny_encoder):
    proc = _run(PRETRAIN, "-m", "masking.rate=0.15,1.5", *_tiny_pretrain_args(tmp_path, tiny_encoder))
    line = _one_error_line(proc)
    assert "masking.rate=1.5" in line, line
    assert not (tmp_path / "sweep").exists(), "no job may start when any sweep job is invalid"


def test_sweep_with_an_unknown_group_option_starts_no_job(tmp_path, tiny_encoder):
    proc = _run(PRETRAIN, "--multirun", "masking=bert,wobbly", *_tiny_pretrain_args(tmp_path, tiny_encoder))
    line = _one_error_line(proc)
    assert "wobbly" in line, line
    assert not (tmp_path / "sweep").exists()


def test_demo_sweep_nested_out_dirs_follow_each_job(tmp_path):
    from adapt.cli import plan_sweep

    jobs = plan_sweep("demo", ["domain=legal,clinical", f"out_dir={tmp_path / 'x'}", "debug=tiny"])
    assert [job.swept for job in jobs] == [["domain=legal"], ["domain=clinical"]]
    for num, job in enumerate(jobs):
        root = Path(job.config.out_dir)
        assert root == tmp_path / "x" / str(num)
        cfg = job.config
        for nested in (cfg.prepare, cfg.prepare_general, cfg.pretrain, cfg.score, cfg.compare):
            assert Path(nested.out_dir).parent == root, nested.out_dir
        assert cfg.pretrain.corpus_dir == cfg.prepare.out_dir


def test_demo_sweep_with_a_shared_nested_out_dir_is_refused(tmp_path):
    proc = _run(DEMO, "-m", "domain=legal,clinical", "debug=tiny", f"out_dir={tmp_path / 'sweep'}",
                f"pretrain.out_dir={tmp_path / 'fixed'}")
    line = _one_error_line(proc)
    assert "pretrain.out_dir" in line, line
    assert not (tmp_path / "sweep").exists() and not (tmp_path / "fixed").exists()


def test_sweep_into_a_folder_of_another_sweep_is_refused(tmp_path, tiny_encoder):
    # job 0 of a reordered sweep would otherwise resume job 0 of the earlier sweep, a run of other settings
    earlier = tmp_path / "sweep" / "0"
    earlier.mkdir(parents=True)
    (earlier / "manifest.json").write_text(json.dumps(
        {"job": "pretrain", "launch": {"mode": "multirun", "job_num": 0, "swept": ["masking.rate=0.3"]}}))
    proc = _run(PRETRAIN, "-m", "masking.rate=0.15,0.3", *_tiny_pretrain_args(tmp_path, tiny_encoder))
    line = _one_error_line(proc)
    assert str(earlier) in line and "masking.rate=0.3" in line, line
    assert sorted(p.name for p in (tmp_path / "sweep").iterdir()) == ["0"], "no job may start"
