"""Atomic file writes (temp file, fsync, ``os.replace``), JSON conversion and file hashing: the one place
every output file is written through."""

from __future__ import annotations

import dataclasses
import datetime as _dt
import hashlib
import json
import os
import secrets
import shutil
from pathlib import Path
from typing import Any, Callable, Iterable


def now_utc() -> str:
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")


def _fsync(path: Path, flags: int) -> None:
    fd = os.open(path, flags)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def fsync_file(path: Path) -> None:
    _fsync(path, os.O_RDWR)


def fsync_dir(folder: Path) -> None:
    """Make a rename or a new entry in ``folder`` durable (POSIX; Windows cannot open a folder for this)."""
    if os.name == "posix":
        _fsync(folder, os.O_RDONLY)


def new_file_mode() -> int:
    """The permission bits a newly created file gets from this process's umask (0666 & ~umask)."""
    mask = os.umask(0o022)
    os.umask(mask)
    return 0o666 & ~mask


def fsync_tree(folder: Path) -> None:
    """fsync every file under ``folder``, then every folder bottom-up, ``folder`` itself last: what a rename of
    ``folder`` needs before it so that the renamed folder's content survives a power loss."""
    folder = Path(folder)
    for path in sorted(folder.rglob("*")):
        if path.is_file():
            fsync_file(path)
    for sub in sorted((p for p in folder.rglob("*") if p.is_dir()), key=lambda p: len(p.parts), reverse=True):
        fsync_dir(sub)
    fsync_dir(folder)


def replace_folder(tmp: Path, final: Path) -> None:
    """Rename the complete, fsynced folder ``tmp`` to ``final`` and fsync the parent. An existing ``final`` is
    first renamed aside (POSIX cannot rename over a non-empty folder) and deleted once the new one is in place."""
    tmp, final = Path(tmp), Path(final)
    aside = final.with_name(f".replaced-{final.name}")
    if final.exists():
        shutil.rmtree(aside, ignore_errors=True)
        os.rename(final, aside)
    os.rename(tmp, final)
    fsync_dir(final.parent)
    shutil.rmtree(aside, ignore_errors=True)


def atomic_write_with(path: Path, write: Callable[[Path], None]) -> None:
    """``write(tmp)`` creates the content at a temp path in the same folder (for writers that need a path:
    pyarrow, safetensors, torch.save); the file is fsynced, renamed over ``path`` with ``os.replace`` and the
    folder fsynced. On any error the temp file is removed and an existing ``path`` is left as it was.
    The writer creates the temp file itself, so it gets the usual permissions (not mkstemp's 0600)."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(f".{path.name}.{os.getpid()}-{secrets.token_hex(6)}.tmp")
    try:
        write(tmp)
        fsync_file(tmp)
        os.replace(tmp, path)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    fsync_dir(path.parent)


def atomic_write_bytes(path: Path, data: bytes) -> None:
    atomic_write_with(path, lambda tmp: tmp.write_bytes(data))


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
