"""Full training state on disk: crash-safe saves, rotation, verification and the resume lookup.

A checkpoint folder ``checkpoints/step-N/`` is a complete model folder (``config.json``, ``model.safetensors``,
tokenizer files; a LoRA run's adapters merged, and also in peft's format under ``adapter/``), so that score and
compare take it as an arm; beside it ``optimizer.pt`` and ``scheduler.pt`` (tensors and numbers only, loaded with
``weights_only=True``) and, written last, ``state.json``: step, data cursor, the run's fingerprint, and the size and
sha256 of every other file it needs.

Crash safety (POSIX rename durability; common practice): everything is written into ``.incomplete-step-N/``, every
file and folder fsynced, the folder renamed and its parent fsynced; only then does ``index.json`` name it, and
only after that are older checkpoints pruned. Resume takes the newest checkpoint whose files match their recorded
sizes and hashes, falling back to an older one with a warning; it reads steps from the saved state, never from
folder names.
"""

from __future__ import annotations

import logging
import shutil
from pathlib import Path
from typing import Any, Callable

import torch
from safetensors import SafetensorError

from adapt.common.errors import ConfigError, InputError
from adapt.common.io import atomic_write_json, fsync_tree, hash_file, read_json, replace_folder

log = logging.getLogger(__name__)

STATE, INDEX = "state.json", "index.json"
TEMP_PREFIXES = (".incomplete-", ".replaced-")  # what a save killed half way leaves; removed at the next save


def save_checkpoint(root: Path, step: int, write_weights: Callable[[Path], None], optimizer: torch.optim.Optimizer,
                    scheduler: Any, state: dict, keep_last: int, linked_files: dict | None = None,
                    best_step: int | None = None) -> Path:
    """Write ``root/step-<step>`` (``write_weights(folder)`` writes the model files), index it, prune to the newest
    ``keep_last`` checkpoints up to this step plus the one of ``best_step`` (the run's best step, never pruned;
    the index names it under ``best``). ``linked_files`` (path relative to the checkpoint -> size and hash)
    are files outside the folder that resuming it needs (a LoRA run's ``base/`` weights). A write that fails (a full
    disk) removes the half-written folder and raises ``InputError``; earlier checkpoints stay as they were."""
    root.mkdir(parents=True, exist_ok=True)
    final, tmp = root / f"step-{step}", root / f".incomplete-step-{step}"
    for leftover in root.iterdir():
        if leftover.name.startswith(TEMP_PREFIXES):
            shutil.rmtree(leftover, ignore_errors=True)
    try:
        tmp.mkdir()
        write_weights(tmp)
        torch.save(optimizer.state_dict(), tmp / "optimizer.pt")
        torch.save(scheduler.state_dict(), tmp / "scheduler.pt")
        files = {**(linked_files or {}), **describe_files(tmp)}
        atomic_write_json(tmp / STATE, {**state, "step": step, "files": files})
        fsync_tree(tmp)
        replace_folder(tmp, final)
        saved = sorted([(s, f) for s, f in _saved_steps(root) if s < step] + [(step, final)])
        best = next(((s, f) for s, f in saved if s == best_step), None)
        kept = sorted(set(saved[-keep_last:]) | ({best} if best else set()))
        index = {"checkpoints": [{"step": s, "folder": f.name} for s, f in kept]}
        if best:
            index["best"] = {"step": best[0], "folder": best[1].name}
        atomic_write_json(root / INDEX, index)
    except (OSError, SafetensorError) as exc:
        shutil.rmtree(tmp, ignore_errors=True)
        where = getattr(exc, "filename", None) or tmp
        intact = ", ".join(f.name for _, f in _saved_steps(root) if f != final) or "none yet"
        raise InputError(f"checkpoint {final} could not be written ({where}: {getattr(exc, 'strerror', None) or exc}); "
                         f"earlier checkpoints are intact ({intact}): free space or fix the folder, then run the "
                         "same command again to resume") from exc
    for _, folder in _saved_steps(root):
        if folder not in {f for _, f in kept}:
            shutil.rmtree(folder, ignore_errors=True)
    log.info("saved checkpoint %s", final)
    return final


def describe_files(folder: Path) -> dict[str, dict]:
    """``relative path -> {"bytes", "sha256"}`` of every file under ``folder`` except ``state.json``."""
    return {str(p.relative_to(folder)): {"bytes": p.stat().st_size, "sha256": hash_file(p)}
            for p in sorted(folder.rglob("*")) if p.is_file() and p.name != STATE}


def verify_checkpoint(folder: Path) -> str | None:
    """None when every file ``state.json`` lists has its recorded size and sha256; else what is wrong."""
    try:
        files = read_json(folder / STATE)["files"]
    except FileNotFoundError:
        return "no state.json"
    except (OSError, ValueError, KeyError, TypeError):
        return "state.json unreadable or lists no files"
    for rel, record in files.items():
        path = folder / rel
        if not path.is_file():
            return f"{rel} is missing"
        if path.stat().st_size != record["bytes"]:
            return f"{rel} has {path.stat().st_size} bytes, {record['bytes']} recorded"
        if hash_file(path) != record["sha256"]:
            return f"{rel} does not match its recorded sha256"
    return None


def _saved_steps(root: Path) -> list[tuple[int, Path]]:
    """(saved step, folder) of every checkpoint folder: the index's and any folder holding a state.json (a kill
    between the rename and the index update leaves one unindexed). Steps come from state.json, else the index."""
    steps: dict[Path, int] = {}
    try:
        for entry in read_json(root / INDEX)["checkpoints"]:
            steps[root / entry["folder"]] = int(entry["step"])
    except (OSError, ValueError, KeyError, TypeError):
        pass  # no index, or unreadable: the folders below still say what there is
    if root.is_dir():
        for folder in root.iterdir():
            if folder.is_dir() and not folder.name.startswith(".") and (folder / STATE).is_file():
                steps.setdefault(folder, -1)
    for folder in steps:
        try:
            steps[folder] = int(read_json(folder / STATE)["step"])
        except (OSError, ValueError, KeyError, TypeError):
            pass
    return sorted(((s, f) for f, s in steps.items()), key=lambda sf: (sf[0], sf[1].name))


def latest_checkpoint(root: Path) -> Path | None:
    """The newest checkpoint that verifies, or None."""
    return next((f for _, f in reversed(_saved_steps(root)) if verify_checkpoint(f) is None), None)


def find_resume_point(resume: str, checkpoints_dir: Path, trained_steps: int = 0) -> Path | None:
    """Apply ``resume=auto|never|<folder>``; returns the checkpoint folder to load or None for a fresh start.

    ``trained_steps``: optimizer steps ``metrics.jsonl`` records. With checkpoints or trained steps on record but no
    usable checkpoint, ``auto`` refuses rather than start again from step 0."""
    if resume not in ("auto", "never"):
        return _explicit(resume)
    saved = list(reversed(_saved_steps(checkpoints_dir)))
    out_dir = checkpoints_dir.parent
    if resume == "never":
        if saved or trained_steps:
            what = f"checkpoint {saved[0][1].name}" if saved else f"{trained_steps} trained steps in metrics.jsonl"
            raise ConfigError(f"resume=never but {out_dir} already holds a run ({what}); use resume=auto to continue "
                              "it or choose a new out_dir")
        return None
    problems = []
    for _, folder in saved:
        problem = verify_checkpoint(folder)
        if problem is None:
            if problems:
                log.warning("not resuming from %s; resuming from %s, the newest complete checkpoint",
                            "; ".join(problems), folder.name)
            return folder
        problems.append(f"{folder.name}: {problem}")
    if problems or trained_steps:
        found = [f"checkpoints ({'; '.join(problems)})"] if problems else []
        found += [f"{trained_steps} trained steps in metrics.jsonl"] if trained_steps else []
        raise InputError(f"resume=auto: {out_dir} holds {' and '.join(found)} but no usable checkpoint, so the run "
                         "cannot continue; pass resume=<a complete checkpoints/step-N folder>, or start again in a "
                         "new out_dir")
    return None


def _explicit(resume: str) -> Path:
    path = Path(resume)
    if not (path / STATE).is_file():
        raise InputError(f"resume={resume}: not a checkpoint folder (no {STATE}); use resume=auto, resume=never or "
                         "a checkpoints/step-N folder")
    problem = verify_checkpoint(path)
    if problem is not None:
        raise InputError(f"resume={resume}: the checkpoint is damaged ({problem}); choose another "
                         "checkpoints/step-N folder or resume=auto")
    return path


def best_checkpoint(root: Path) -> Path | None:
    """The checkpoint the index names as the run's best (kept out of rotation), or None."""
    try:
        entry = read_json(root / INDEX)["best"]
    except (OSError, ValueError, KeyError, TypeError):
        return None
    folder = root / entry["folder"]
    return folder if (folder / STATE).is_file() else None


def read_state(path: Path) -> dict:
    return read_json(path / STATE)


def load_checkpoint(path: Path, load_weights: Callable[[Path], None], optimizer: torch.optim.Optimizer,
                    scheduler: Any) -> dict:
    """Restore weights (``load_weights(folder)``), optimizer and scheduler in place; return ``state.json``."""
    load_weights(path)
    optimizer.load_state_dict(torch.load(path / "optimizer.pt", weights_only=True))
    scheduler.load_state_dict(torch.load(path / "scheduler.pt", weights_only=True))
    return read_state(path)
