"""No product default points into the invented samples; the demo and the presets are what use them."""

from __future__ import annotations

import dataclasses
import subprocess
import sys
from pathlib import Path

import pytest

from adapt.config import compose_job, samples_dir

REQUIRED = {"prepare": ["inputs=[x]"], "pretrain": ["corpus_dir=x"], "score": ["texts=x"],
            "compare": ["+arms.base=x", "task.dir=x"]}


def _strings(obj, prefix: str = "") -> dict[str, str]:
    """Every string value of a (nested) config dataclass, by key path."""
    out: dict[str, str] = {}
    items = dataclasses.asdict(obj).items() if dataclasses.is_dataclass(obj) else obj.items()
    for key, value in items:
        path = f"{prefix}{key}"
        if isinstance(value, dict):
            out.update(_strings(value, path + "."))
        elif isinstance(value, list):
            out.update({f"{path}[{i}]": v for i, v in enumerate(value) if isinstance(v, str)})
        elif isinstance(value, str):
            out[path] = value
    return out


def _in_samples(value: str) -> bool:
    root = Path(samples_dir()).resolve()
    return "samples_dir" in value or "corpora_samples" in value or root in Path(value).resolve().parents


@pytest.mark.parametrize("job", sorted(REQUIRED))
def test_job_defaults_do_not_point_into_the_samples(job):
    cfg = compose_job(job, REQUIRED[job])
    inside = {k: v for k, v in _strings(cfg).items() if _in_samples(v)}
    assert not inside


def test_compare_without_a_task_asks_for_one(tmp_path):
    exe = Path(sys.executable).parent / "adapt-compare"
    proc = subprocess.run([str(exe), "+arms.base=x", f"out_dir={tmp_path / 'o'}"], capture_output=True, text=True,
                          timeout=120)
    lines = [line for line in proc.stderr.splitlines() if line.strip()]
    assert proc.returncode == 2 and len(lines) == 1 and "task.dir is not set" in lines[0], proc.stderr
    assert not (tmp_path / "o").exists()


@pytest.mark.parametrize("overrides,keys", [
    (["inputs=[x]", "preset=legal"], ["quality.gold_path", "profile.general_path", "contamination.task_dir"]),
    (["inputs=[x]", "preset=clinical"], ["quality.gold_path", "profile.general_path", "contamination.task_dir"]),
])
def test_prepare_presets_use_existing_sample_files(overrides, keys):
    cfg = compose_job("prepare", overrides)
    for key in keys:
        value = cfg
        for part in key.split("."):
            value = getattr(value, part)
        assert _in_samples(value) and Path(value).exists(), (key, value)


def test_demo_sets_the_sample_paths_itself():
    cfg = compose_job("demo", [])
    for value in (cfg.prepare.quality.gold_path, cfg.prepare.profile.general_path, cfg.prepare.contamination.task_dir,
                  cfg.prepare_general.quality.gold_path, cfg.compare.task.dir):
        assert _in_samples(value) and Path(value).exists(), value
