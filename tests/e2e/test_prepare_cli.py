"""The adapt-prepare console script: every bad input ends in one error line, exit code 2, inputs unchanged.

The cases run as concurrent subprocesses (each pays the interpreter and library start-up) to keep this fast.
"""

from __future__ import annotations

import gzip
import hashlib
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

SCRIPT = Path(sys.executable).with_name("adapt-prepare")
QUIET = ["quality.gold_path=null", "profile.general_path=null", "runtime.progress=false"]


def _good_docs(n: int = 30) -> str:
    words = "tenant landlord paid the rent for three months and the court held the notice valid".split()
    return "\n".join(json.dumps({"id": f"d{i}", "text": " ".join(words[(i + j) % len(words)] for j in range(40))})
                     for i in range(n)) + "\n"


def _make_cases(root: Path) -> dict[str, tuple[list[str], Path]]:
    """name -> (overrides, input folder)."""
    cases = {}

    def folder(name: str, files: dict[str, bytes]) -> Path:
        d = root / name
        d.mkdir()
        for fname, data in files.items():
            (d / fname).write_bytes(data)
        return d

    binary = folder("binary_only", {"logo.png": b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR", "blob.bin": bytes(range(256))})
    cases["nothing_readable"] = ([f"inputs=[{binary}]"], binary)
    nofield = folder("no_text_field", {"a.jsonl": b'{"id": 1, "body": "some words"}\n'})
    cases["missing_text_field"] = ([f"inputs=[{nofield}]"], nofield)
    broken = folder("corrupt_gzip", {"good.jsonl": _good_docs().encode(), "bad.jsonl.gz": b"not gzip at all"})
    cases["unreadable_file"] = ([f"inputs=[{broken}]"], broken)
    cases["missing_path"] = ([f"inputs=[{root / 'nowhere'}]"], binary)
    good = folder("good", {"a.jsonl": _good_docs().encode(),
                           "b.jsonl.gz": gzip.compress(_good_docs(5).encode())})
    cases["bad_config_value"] = ([f"inputs=[{good}]", "dedup.threshold=1.3"], good)
    cases["out_dir_inside_input"] = ([f"inputs=[{good}]", f"out_dir={good / 'out'}"], good)
    return cases


def _digest(folder: Path) -> dict[str, str]:
    return {str(p): hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(folder.rglob("*")) if p.is_file()}


@pytest.fixture(scope="module")
def outcomes(tmp_path_factory):
    root = tmp_path_factory.mktemp("cli")
    cases = _make_cases(root)
    before = {name: _digest(folder) for name, (_, folder) in cases.items()}
    env = dict(os.environ, HF_HUB_OFFLINE="1", TOKENIZERS_PARALLELISM="false")
    procs = {}
    for name, (overrides, _) in cases.items():
        out = [] if any(o.startswith("out_dir=") for o in overrides) else [f"out_dir={root / ('out_' + name)}"]
        procs[name] = subprocess.Popen([str(SCRIPT), *QUIET, *overrides, *out], stdout=subprocess.PIPE,
                                       stderr=subprocess.PIPE, text=True, env=env, cwd=root)
    results = {name: (p.wait(timeout=300), *p.communicate()) for name, p in procs.items()}
    after = {name: _digest(folder) for name, (_, folder) in cases.items()}
    return results, before, after


EXPECTED = {
    "nothing_readable": "no readable documents",
    "missing_text_field": "no field 'text'",
    "unreadable_file": "bad.jsonl.gz: cannot be read",
    "missing_path": "does not exist",
    "bad_config_value": "dedup.threshold=1.3 is outside (0, 1); try dedup.threshold=0.6",
    "out_dir_inside_input": "is inside the input folder",
}


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_bad_input_gives_one_line_and_exit_2(outcomes, name):
    results, before, after = outcomes
    code, stdout, stderr = results[name]
    assert code == 2, stderr
    lines = stderr.splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: "), stderr
    assert EXPECTED[name] in lines[0]
    assert "Traceback" not in stderr and stdout == ""
    assert after[name] == before[name]  # no input file was modified, added or removed
