"""The pretrain run folder: ``metrics.jsonl`` (one JSON object per line) and where its parts live.

``metrics.jsonl`` survives an interrupted session: a torn last line (a kill in the middle of a write) is skipped
when reading, and a resumed run first cuts the log back to its checkpoint's step, so that no step is ever recorded
twice. The log is fsynced before each checkpoint, so every step a checkpoint holds is on record.
"""

from __future__ import annotations

import json
import logging
import os
import tempfile
from pathlib import Path
from typing import Any, Callable

from adapt.common.errors import InputError
from adapt.common.io import atomic_write_text, fsync_file, now_utc, to_jsonable

log = logging.getLogger(__name__)

METRICS = "metrics.jsonl"
BASE, FINAL, BEST, CHECKPOINTS = "base", "final", "best", "checkpoints"


class MetricsLog:
    """Append-only ``metrics.jsonl``: one JSON object per line, flushed at once. ``mirror(record)``, when set,
    also receives every record (the TensorBoard event files)."""

    def __init__(self, path: Path | str, mirror: Callable[[dict[str, Any]], None] | None = None):
        self.path = Path(path)
        self.mirror = mirror

    def write(self, **record: Any) -> None:
        record = {"time": now_utc(), **to_jsonable(record)}
        self.path.parent.mkdir(parents=True, exist_ok=True)
        with open(self.path, "a", encoding="utf-8") as fh:
            fh.write(json.dumps(record, ensure_ascii=False) + "\n")
            fh.flush()
        if self.mirror is not None:
            self.mirror(record)

    def sync(self) -> None:
        """Make every line written so far durable (called before a checkpoint names the step)."""
        if self.path.exists():
            fsync_file(self.path)

    def read(self) -> list[dict[str, Any]]:
        """Every complete record; a line that does not parse (torn by a kill) is skipped."""
        if not self.path.exists():
            return []
        records = []
        for number, line in enumerate(self.path.read_text(encoding="utf-8").splitlines(), 1):
            if not line.strip():
                continue
            try:
                records.append(json.loads(line))
            except json.JSONDecodeError:
                log.warning("%s line %d is incomplete (an interrupted write); skipped", self.path, number)
        return records

    def trained_steps(self) -> int:
        """The highest optimizer step on record (0 when training never started)."""
        return max((int(r["step"]) for r in self.read() if r.get("phase") == "train"), default=0)

    def cut_back(self, step: int | None) -> None:
        """Keep only what the checkpoint at ``step`` had recorded (None: a fresh start keeps nothing); drop any
        torn line and the end-of-run record. Rewritten atomically."""
        if not self.path.exists():
            return
        records = self.read()
        keep = [] if step is None else [r for r in records
                                        if r.get("phase") != "end" and int(r.get("step") or 0) <= step]
        if len(keep) < len(records) or self.path.read_text(encoding="utf-8").count("\n") != len(keep):
            log.info("%s: kept %d records up to step %s, dropped %d from after it", self.path, len(keep), step,
                     len(records) - len(keep))
            atomic_write_text(self.path, "".join(json.dumps(r, ensure_ascii=False) + "\n" for r in keep))


def ensure_writable(folder: Path | str, key: str) -> None:
    """``InputError`` naming ``key`` unless files can be written in ``folder`` (or, while it does not exist yet,
    in its nearest existing parent, where it would be created). Leaves nothing behind."""
    folder = Path(folder).absolute()
    existing = next(p for p in (folder, *folder.parents) if p.exists())
    problem = None
    if not existing.is_dir():
        problem = f"{existing} is a file, not a folder"
    elif existing == folder:
        try:  # a real write: permissions alone do not tell (root, network filesystems)
            fd, probe = tempfile.mkstemp(prefix=".write-probe-", dir=folder)
            os.close(fd)
            os.unlink(probe)
        except OSError as exc:
            problem = exc.strerror or str(exc)
    elif not os.access(existing, os.W_OK | os.X_OK):  # also false on a read-only filesystem, even for root
        problem = f"cannot create it in {existing} (read-only or no permission)"
    if problem:
        raise InputError(f"{key}={folder}: cannot write there ({problem}); choose a folder you can write to")
