"""The sample generator (scripts/samples/) rebuilds corpora_samples/ byte for byte."""

from __future__ import annotations

import hashlib
import os
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
SAMPLES = ROOT / "corpora_samples"
GENERATOR = ROOT / "scripts" / "samples" / "generate.py"
NOT_GENERATED = {"README.md"}


def _digests(folder: Path) -> dict[str, str]:
    return {p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def test_generator_reproduces_the_committed_samples(tmp_path):
    out = tmp_path / "samples"
    env = {**os.environ, "PYTHONDONTWRITEBYTECODE": "1"}
    proc = subprocess.run([sys.executable, str(GENERATOR), "--out", str(out)], capture_output=True, text=True,
                          env=env, timeout=300)
    assert proc.returncode == 0, proc.stdout + proc.stderr  # non-zero: the generator's own checks failed
    made = _digests(out)
    committed = {k: v for k, v in _digests(SAMPLES).items() if k not in NOT_GENERATED}
    assert len(made) > 300
    assert sorted(made) == sorted(committed)
    changed = [name for name in made if made[name] != committed[name]]
    assert not changed, f"{len(changed)} files differ, e.g. {changed[:5]}"
