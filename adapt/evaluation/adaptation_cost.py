"""What each adapted arm's pretraining cost, read from its pretrain run folder, and what it bought.

An arm's checkpoint may be a pretrain run folder's ``final/`` or ``best/``, or one of its intermediate
``checkpoints/step-N`` folders. Cost = tokens seen up to that step (metrics.jsonl), wall seconds of the run's
sessions up to the time that step was logged (manifest.json), and process-seconds (wall × processes: CPU
processes or GPUs, one device each). When several arms are checkpoints of one run, the downstream score against
steps and a plain recommendation come from the seed-aware intervals.
"""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any

from adapt.common.io import read_json
from adapt.contracts.manifest import MANIFEST, session_seconds
from adapt.contracts.run_folder import METRICS, MetricsLog

STEP_DIR = re.compile(r"step-(\d+)")


def _run_of(checkpoint: Path) -> Path | None:
    """The pretrain run folder a checkpoint folder belongs to (itself, its parent or grandparent)."""
    for folder in (checkpoint, checkpoint.parent, checkpoint.parent.parent):
        manifest = folder / MANIFEST
        if manifest.is_file() and read_json(manifest).get("job") == "pretrain":
            return folder
    return None


def _step_of(checkpoint: Path, run: Path, result: dict) -> int | None:
    m = STEP_DIR.fullmatch(checkpoint.name)
    if m:
        return int(m.group(1))
    if checkpoint.name == "best" and result.get("best"):
        return int(result["best"]["step"])
    return result.get("step")


def arm_cost(checkpoint: str | Path) -> dict[str, Any] | None:
    """Cost of the pretraining behind ``checkpoint``; None when it is not part of a pretrain run folder."""
    checkpoint = Path(checkpoint)
    run = _run_of(checkpoint)
    if run is None:
        return None
    result = read_json(run / "result.json") if (run / "result.json").is_file() else {}
    step = _step_of(checkpoint, run, result)
    train = [r for r in MetricsLog(run / METRICS).read() if r.get("phase") == "train" and r.get("step") == step]
    record = train[-1] if train else {}
    manifest = read_json(run / MANIFEST)
    wall = session_seconds(manifest, until=record.get("time"))
    processes = int(result.get("num_processes") or 1)
    return {"run": str(run), "step": step, "tokens_seen": record.get("tokens_seen"), "wall_seconds": wall,
            "processes": processes, "process_seconds": wall * processes if wall is not None else None,
            "precision": result.get("precision")}


def gain_per_hour(cost: dict, primary: dict) -> dict[str, float | None]:
    """The primary test's difference and interval per hour of pretraining wall time."""
    hours = (cost.get("wall_seconds") or 0) / 3600
    return {k: (primary[k] / hours if hours > 0 else None) for k in ("difference", "ci_low", "ci_high")}


def recommend(points: list[dict], step_tests: list[dict]) -> str:
    """A plain recommendation for checkpoints of one run. ``points`` (by step) carry ``vs_reference``, the primary
    record against the reference arm; ``step_tests[i]`` is the record of point i+1 against point i."""
    if not any(p["vs_reference"]["ci_low"] > 0 for p in points):
        return ("not worth it: no checkpoint of this run is detectably better than the reference arm "
                "(every interval reaches 0 or below)")
    if step_tests and step_tests[-1]["ci_low"] > 0:
        return (f"continue: the last checkpoint (step {points[-1]['step']}) is detectably better than the one "
                f"before it (step {points[-2]['step']}); more pretraining may still pay")
    first_good = next(p for p in points if p["vs_reference"]["ci_low"] > 0)
    return (f"stop: the gain over the reference is detectable from step {first_good['step']}, and the last "
            "checkpoint is not detectably better than the one before it")
