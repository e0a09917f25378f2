"""``manifest.json``: the record every job leaves in its output folder.

It holds the tool version, resolved config, input file hashes, start/end time, host and seed, so any reported
number can be traced to what produced it. ``RunFolder`` is its one writer.
"""

from __future__ import annotations

import datetime as _dt
import platform
import socket
from pathlib import Path
from typing import Any, Iterable

from adapt import __version__
from adapt.common.io import atomic_write_json, hash_inputs, now_utc, read_json, to_jsonable

MANIFEST = "manifest.json"

# How the command line started this job (run or sweep, its overrides); None when called as a library.
_LAUNCH: dict[str, Any] | None = None


def record_launch(**launch: Any) -> None:
    """Set the launch record that every manifest written from now on carries (called by the CLI per job)."""
    global _LAUNCH
    _LAUNCH = to_jsonable(launch)


def session_seconds(manifest: dict, until: str | None = None) -> float | None:
    """Seconds between start and end of every session of a run (a resumed run has several); with ``until`` (an
    ISO time, e.g. a metrics record's), only the part before it. None when no session has both times."""
    stop = _dt.datetime.fromisoformat(until) if until else None
    total, seen = 0.0, False
    for session in manifest.get("sessions") or [{"started": manifest.get("started"), "ended": manifest.get("ended")}]:
        try:
            start = _dt.datetime.fromisoformat(str(session["started"]))
            end = _dt.datetime.fromisoformat(str(session["ended"]))
        except (KeyError, TypeError, ValueError):
            continue
        end = min(end, stop) if stop is not None else end
        total += max(0.0, (end - start).total_seconds())
        seen = True
    return total if seen else None


class RunFolder:
    """An output folder with its manifest. ``finish()`` stamps the end time and the outcome."""

    def __init__(self, out_dir: Path | str, job: str, config: Any, inputs: Iterable[Path | str], seed: int | None):
        self.path = Path(out_dir)
        self.path.mkdir(parents=True, exist_ok=True)
        self.manifest_path = self.path / MANIFEST
        previous = read_json(self.manifest_path) if self.manifest_path.exists() else {}
        self.manifest: dict[str, Any] = {
            "tool": "adapt",
            "tool_version": __version__,
            "job": job,
            "config": to_jsonable(config),
            "launch": _LAUNCH,
            "inputs": hash_inputs(inputs),
            "seed": seed,
            "host": socket.gethostname(),
            "platform": platform.platform(),
            "python": platform.python_version(),
            "started": now_utc(),
            "ended": None,
            "status": "running",
            "sessions": previous.get("sessions", []) + [{"started": now_utc()}],
        }
        atomic_write_json(self.manifest_path, self.manifest)

    def finish(self, status: str = "completed", **extra: Any) -> None:
        self.manifest["ended"] = now_utc()
        self.manifest["status"] = status
        self.manifest["sessions"][-1]["ended"] = self.manifest["ended"]
        self.manifest.update(to_jsonable(extra))
        atomic_write_json(self.manifest_path, self.manifest)
