"""Output folders: manifest, metrics log and atomic file writes.

Every job writes a ``manifest.json`` into its output folder recording the tool version, resolved config,
input file hashes, start/end time, host and seed, so any reported number can be traced to what produced it.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import hashlib
import json
import logging
import os
import platform
import socket
import tempfile
from pathlib import Path
from typing import Any, Iterable

from adapt import __version__

log = logging.getLogger(__name__)


def _now() -> str:
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")


def atomic_write_bytes(path: Path, data: bytes) -> None:
    """Write ``data`` to ``path`` via a temp file in the same folder and ``os.replace``."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def atomic_write_text(path: Path, text: str) -> None:
    atomic_write_bytes(path, text.encode("utf-8"))


def to_jsonable(obj: Any) -> Any:
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        return {f.name: to_jsonable(getattr(obj, f.name)) for f in dataclasses.fields(obj)}
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(v) for v in obj]
    if isinstance(obj, Path):
        return str(obj)
    if hasattr(obj, "item") and callable(obj.item):  # numpy / torch scalars
        return obj.item()
    return obj


def atomic_write_json(path: Path, obj: Any) -> None:
    atomic_write_text(path, json.dumps(to_jsonable(obj), indent=2, ensure_ascii=False) + "\n")


def read_json(path: Path) -> Any:
    return json.loads(Path(path).read_text(encoding="utf-8"))


def hash_file(path: Path, chunk_bytes: int = 1 << 20) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        while chunk := fh.read(chunk_bytes):
            h.update(chunk)
    return h.hexdigest()


def hash_inputs(paths: Iterable[Path | str]) -> dict[str, str]:
    """sha256 of every file under the given files/folders (sorted; hidden files skipped)."""
    hashes: dict[str, str] = {}
    for p in paths:
        p = Path(p)
        if p.is_file():
            hashes[str(p)] = hash_file(p)
        elif p.is_dir():
            for f in sorted(p.rglob("*")):
                if f.is_file() and not any(part.startswith(".") for part in f.relative_to(p).parts):
                    hashes[str(f)] = hash_file(f)
    return hashes


class RunFolder:
    """An output folder with its manifest. ``finish()`` stamps the end time and the outcome."""

    def __init__(self, out_dir: Path | str, job: str, config: Any, inputs: Iterable[Path | str], seed: int | None):
        self.path = Path(out_dir)
        self.path.mkdir(parents=True, exist_ok=True)
        self.manifest_path = self.path / "manifest.json"
        previous = read_json(self.manifest_path) if self.manifest_path.exists() else {}
        self.manifest: dict[str, Any] = {
            "tool": "adapt",
            "tool_version": __version__,
            "job": job,
            "config": to_jsonable(config),
            "inputs": hash_inputs(inputs),
            "seed": seed,
            "host": socket.gethostname(),
            "platform": platform.platform(),
            "python": platform.python_version(),
            "started": _now(),
            "ended": None,
            "status": "running",
            "sessions": previous.get("sessions", []) + [{"started": _now()}],
        }
        atomic_write_json(self.manifest_path, self.manifest)

    def finish(self, status: str = "completed", **extra: Any) -> None:
        self.manifest["ended"] = _now()
        self.manifest["status"] = status
        self.manifest["sessions"][-1]["ended"] = self.manifest["ended"]
        self.manifest.update(to_jsonable(extra))
        atomic_write_json(self.manifest_path, self.manifest)


class MetricsLog:
    """Append-only ``metrics.jsonl``: one JSON object per line, flushed at once."""

    def __init__(self, path: Path | str):
        self.path = Path(path)
        self.path.parent.mkdir(parents=True, exist_ok=True)

    def write(self, **record: Any) -> None:
        record = {"time": _now(), **to_jsonable(record)}
        with open(self.path, "a", encoding="utf-8") as fh:
            fh.write(json.dumps(record, ensure_ascii=False) + "\n")
            fh.flush()

    def read(self) -> list[dict[str, Any]]:
        if not self.path.exists():
            return []
        return [json.loads(line) for line in self.path.read_text(encoding="utf-8").splitlines() if line.strip()]
