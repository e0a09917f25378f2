"""Find and check the output folders a report reads: each must hold this tool's ``manifest.json`` of the right
job. A folder of another kind is refused with one line; a run that did not complete is kept and marked, so the
report shows which part is missing instead of failing.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from adapt.common.errors import InputError
from adapt.common.io import read_json
from adapt.contracts.manifest import MANIFEST

# what each job leaves when it completed; a folder whose manifest says otherwise is "incomplete"
COMPLETED = "completed"
# the command that makes each kind of folder, for the messages
COMMANDS = {"prepare": "adapt-prepare", "vocab": "adapt-vocab", "pretrain": "adapt-pretrain",
            "score": "adapt-score", "compare": "adapt-compare", "canary": "adapt-canary mode=audit"}


@dataclass
class Source:
    """One folder the report was asked to read (or could have read), and what was found there."""

    role: str  # "prepared", "general", "pretrain", "score", "compare"
    key: str  # the config key that named it, for messages
    job: str  # the job expected to have written it
    path: Path | None = None
    # "read" (complete), "incomplete" (manifest status not completed), "not given"
    state: str = "not given"
    note: str = ""
    manifest: dict[str, Any] = field(default_factory=dict)

    @property
    def usable(self) -> bool:
        return self.state == "read"

    def section_head(self) -> dict[str, Any]:
        """The state, note and path every report section starts from."""
        return {"state": self.state, "note": self.note, "path": str(self.path) if self.path else None}

    def describe(self) -> dict[str, Any]:
        return {"role": self.role, "key": self.key, "job": self.job, "path": str(self.path) if self.path else None,
                "state": self.state, "note": self.note, "status": self.manifest.get("status")}


def read_json_file(path: Path, key: str) -> Any:
    """A JSON file of an output folder; a broken one is one clear line naming it."""
    try:
        return read_json(path)
    except (json.JSONDecodeError, UnicodeDecodeError) as exc:
        raise InputError(f"{key}: {path} is not valid JSON ({exc}); the run that wrote it may have been "
                         f"interrupted: run it again") from exc
    except OSError as exc:
        raise InputError(f"{key}: cannot read {path} ({exc.strerror})") from exc


def read_jsonl_file(path: Path, key: str) -> list[dict]:
    rows = []
    try:
        lines = path.read_text(encoding="utf-8").splitlines()
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"{key}: cannot read {path} ({exc})") from exc
    for n, line in enumerate(lines, start=1):
        if not line.strip():
            continue
        try:
            row = json.loads(line)
        except json.JSONDecodeError as exc:
            raise InputError(f"{key}: {path}:{n} is not valid JSON ({exc.msg}); run the job again") from exc
        if isinstance(row, dict):
            rows.append(row)
    return rows


def open_source(role: str, key: str, job: str, value: str | None) -> Source:
    """Check one folder: it exists, holds this tool's manifest of ``job``; mark it incomplete if it did not finish."""
    src = Source(role, key, job)
    if not value:
        src.note = f"not given (set {key}=<output folder of {COMMANDS[job]}>)"
        return src
    path = Path(value)
    src.path = path
    if not path.is_dir():
        raise InputError(f"{key}={value}: folder does not exist; give the output folder of {COMMANDS[job]} "
                         f"or leave {key} unset")
    manifest_path = path / MANIFEST
    if not manifest_path.is_file():
        raise InputError(f"{key}={value}: no {MANIFEST}, so it is not an output folder of this tool; give the "
                         f"out_dir of an {COMMANDS[job]} run")
    manifest = read_json_file(manifest_path, key)
    if not isinstance(manifest, dict) or manifest.get("tool") != "adapt":
        raise InputError(f"{key}={value}: {MANIFEST} was not written by this tool; give the out_dir of an "
                         f"{COMMANDS[job]} run")
    if manifest.get("job") != job:
        other = manifest.get("job")
        raise InputError(f"{key}={value}: this is the output of the {other} job, not of {job}; "
                         f"give it as {_key_for(other)} or give the out_dir of an {COMMANDS[job]} run")
    src.manifest = manifest
    status = manifest.get("status")
    if status == COMPLETED:
        src.state = "read"
    else:
        src.state = "incomplete"
        shown = ("its curves are shown up to there, its end figures left out; resume it with "
                 f"adapt-pretrain resume=auto out_dir={value}" if job == "pretrain" else
                 f"its figures are left out; run {COMMANDS[job]} again with out_dir={value}")
        src.note = (f"the {job} run has not completed (manifest status {status!r}"
                    + (f", at step {manifest['step']}" if "step" in manifest else "") + f"): {shown}")
    return src


def _key_for(job: Any) -> str:
    return {"prepare": "prepared_dir or general_dir", "vocab": "vocab_dir", "pretrain": "pretrain_dir",
            "score": "score_dirs", "compare": "compare_dir", "canary": "canary_dir"}.get(str(job), "the matching key")


def expand_score_dirs(values: list[str]) -> list[str]:
    """Each entry is a score folder, or a folder of score folders (one level down, sorted by name)."""
    found: list[str] = []
    for value in values:
        path = Path(value)
        if path.is_dir() and not (path / MANIFEST).is_file():
            subs = sorted(p for p in path.iterdir() if p.is_dir() and (p / MANIFEST).is_file())
            if subs:
                found.extend(str(p) for p in subs)
                continue
        found.append(value)
    return found
