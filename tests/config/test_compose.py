"""Every job config, every config-group option, every experiment and debug preset composes and validates."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from adapt.config import CONF_DIR, JOBS, compose_job
from adapt.common.errors import ConfigError

REQUIRED = {"prepare": ["inputs=[x]"], "pretrain": ["corpus_dir=x"], "score": ["texts=x"],
            "compare": ["+arms.base=x", "task.dir=x"], "report": ["compare_dir=x"], "demo": [],
            "vocab": ["corpus=x"], "canary": ["mode=plant", "corpus=x"]}
GROUP_OWNER = {"encoder": "pretrain", "masking": "pretrain", "schedule": "pretrain", "adapter": "pretrain",
               "task": "compare"}


@pytest.mark.parametrize("job", sorted(JOBS))
def test_job_composes_with_defaults_and_debug(job):
    compose_job(job, REQUIRED[job])
    compose_job(job, REQUIRED[job] + ["debug=tiny"])


def _options(group: str) -> list[str]:
    return sorted(p.stem for p in (CONF_DIR / group).glob("*.yaml"))


@pytest.mark.parametrize("group,option", [(g, o) for g in GROUP_OWNER for o in _options(g)])
def test_every_group_option_composes(group, option):
    job = GROUP_OWNER[group]
    compose_job(job, REQUIRED[job] + [f"{group}={option}"])


JOB_GROUPS = [(job, group.name, option.stem) for job in sorted(JOBS)
              for group in sorted((CONF_DIR / job).iterdir()) if group.is_dir()
              for option in sorted(group.glob("*.yaml"))]


@pytest.mark.parametrize("job,group,option", JOB_GROUPS)
def test_every_job_specific_option_composes(job, group, option):
    compose_job(job, REQUIRED[job] + [f"{group}={option}"])


def test_job_specific_options_exist():
    assert ("prepare", "preset", "clinical") in JOB_GROUPS and ("demo", "debug", "tiny") in JOB_GROUPS


def test_experiments_are_covered():
    assert ("pretrain", "experiment", "legal_lora") in JOB_GROUPS


def test_bad_values_are_collected_into_one_error():
    with pytest.raises(ConfigError) as err:
        compose_job("pretrain", ["corpus_dir=x", "masking.rate=1.3", "schedule.decay=wobbly"])
    message = str(err.value)
    assert "masking.rate=1.3" in message and "schedule.decay='wobbly'" in message and "\n" not in message


@pytest.mark.parametrize("args", [["bogus_key=1"], ["masking.rate=abc"], ["corpus_dir=x", "masking.rate=2"]])
def test_cli_reports_bad_config_in_one_line_with_exit_2(args, tmp_path):
    exe = Path(sys.executable).parent / "adapt-pretrain"
    proc = subprocess.run([str(exe), f"out_dir={tmp_path / 'o'}", *args], capture_output=True, text=True,
                          timeout=120)
    assert proc.returncode == 2, proc.stderr
    lines = [l for l in proc.stderr.splitlines() if l.strip()]
    assert len(lines) == 1 and lines[0].startswith("error: "), proc.stderr
    assert "Traceback" not in proc.stderr


@pytest.mark.parametrize("job,key", [("pretrain", "corpus_dir"), ("compare", "task.dir"), ("score", "texts"),
                                     ("vocab", "corpus"), ("canary", "mode")])
def test_a_key_without_default_is_named_with_the_fix(job, key):
    from adapt.common.errors import ConfigError

    with pytest.raises(ConfigError) as err:
        compose_job(job, [])
    assert f"{key} is not set" in str(err.value) and f"pass {key}=" in str(err.value)
    assert "Structured config" not in str(err.value)
