"""What a pretrain run keeps across its sessions: the state of this start (``Session``), what the loop changes and a
checkpoint holds (``Training``), opening a run (resume point, fingerprint check, metrics cut back), saving and
restoring checkpoints, and the result of a session that stopped before the run's end.

With several processes the main process decides and writes; every process learns the outcome through
``on_main`` (a refused resume or a failed save ends every rank with the same line) and holds the same weights
(checked at every checkpoint).
"""

from __future__ import annotations

import logging
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import torch
from accelerate import Accelerator

from adapt.common.errors import ConfigError, InputError
from adapt.common.runtime import PrecisionChoice
from adapt.config.pretrain import PretrainJob
from adapt.contracts.checkpoint import STATE, find_resume_point, load_checkpoint, read_state, save_checkpoint
from adapt.contracts.manifest import RunFolder
from adapt.contracts.run_folder import BASE, CHECKPOINTS, MetricsLog
from adapt.training.adapters import Adapter
from adapt.training.encoder import vocab_sha256
from adapt.training.export import WEIGHTS
from adapt.training.fingerprint import build_fingerprint, fingerprint_differences, weights_sha256
from adapt.training.packing import BatchCursor
from adapt.training.ranks import on_main
from adapt.training.stop_signal import StopSignal, agreed_stop

log = logging.getLogger(__name__)


@dataclass
class Training:
    """What the loop changes, and what a checkpoint saves and resume restores."""

    adapter: Adapter
    loss_module: torch.nn.Module
    optimizer: torch.optim.Optimizer
    scheduler: Any
    cursor: BatchCursor
    trainable: int
    total: int
    fingerprint: dict
    step: int = 0
    tokens_seen: int = 0
    base_weights: dict | None = None  # size and sha256 of base/model.safetensors, which a LoRA resume needs
    last_checkpoint: str | None = None
    stopped_by: str | None = None  # a signal's name, or schedule.stop_after_steps
    replay_cursor: BatchCursor | None = None  # the general text's order when replay.share > 0
    # early stopping and the best step (adapt.training.early_stop): saved in state.json, restored on resume
    best_loss: float | None = None  # the domain held-out loss of best_step
    best_step: int | None = None
    evals_since_best: int = 0  # evaluations in a row without an improvement of early_stop.min_improvement


@dataclass
class Session:
    """What every phase of this start of the run needs: settings, processes, run folder, the stop flag."""

    cfg: PretrainJob
    accelerator: Accelerator
    precision: PrecisionChoice
    stop: StopSignal
    out: Path
    metrics: MetricsLog

    @property
    def main(self) -> bool:
        return self.accelerator.is_main_process

    def stop_agreed(self) -> bool:
        """Whether any process was asked to stop (a collective: every rank calls it at the same safe point)."""
        return agreed_stop(self.stop.requested, self.accelerator)[0]


BASE_LINK = f"../../{BASE}/{WEIGHTS}"  # a checkpoint's path to the run's base/ weights (LoRA resumes from them)


def open_run(s: Session, model, tokenizer, adapter: Adapter) -> tuple[str | None, dict]:
    """Main process: the checkpoint to resume (None: fresh start) and this run's fingerprint. Refuses, before
    anything in out_dir changes, a checkpoint made with other settings; cuts metrics.jsonl back to its step."""
    cfg = s.cfg
    resume_from = find_resume_point(cfg.resume, s.out / CHECKPOINTS, s.metrics.trained_steps())
    fingerprint = build_fingerprint(cfg, model, vocab_sha256(tokenizer), s.accelerator.num_processes)
    if resume_from is None:
        s.metrics.cut_back(None)  # what a session left before its first step: it starts again
        return None, fingerprint
    if adapter.needs_base and resume_from.resolve().parent.parent != s.out.resolve():
        raise InputError(f"resume={cfg.resume}: a {cfg.adapter.kind} run resumes only from a checkpoint in its own "
                         f"out_dir (it needs that run's {BASE}/); use out_dir={resume_from.parent.parent}")
    state = read_state(resume_from)
    differences = fingerprint_differences(state.get("fingerprint", {}), fingerprint)
    if differences:
        raise ConfigError(f"resume from {resume_from}: the run's settings differ: {'; '.join(differences)}; "
                          f"continue with the same settings (the checkpoint's are under \"fingerprint\" in its "
                          f"{STATE}), or give the new settings a new out_dir")
    if state.get("precision") != s.precision.precision:
        log.warning("the checkpoint was trained in %s, this session runs in %s: the run continues, but not bit for "
                    "bit as it would have", state.get("precision"), s.precision.precision)
    s.metrics.cut_back(state["step"])
    return str(resume_from), fingerprint


def restore_training(t: Training, model, resume_from: Path) -> None:
    state = load_checkpoint(resume_from, lambda folder: t.adapter.load_weights(model, folder), t.optimizer,
                            t.scheduler)
    try:
        t.cursor.load_state_dict(state["cursor"])
        if t.replay_cursor is not None:
            t.replay_cursor.load_state_dict(state["replay_cursor"])
    except RuntimeError as exc:  # the fingerprint covers what decides the order; kept as a last guard
        raise ConfigError(f"resume from {resume_from}: {exc}; resume with the same settings or start a new "
                          "out_dir") from exc
    t.step, t.tokens_seen = state["step"], state["tokens_seen"]
    early = state.get("early_stop") or {}
    t.best_loss, t.best_step = early.get("best_loss"), early.get("best_step")
    t.evals_since_best = int(early.get("evals_since_best", 0))
    t.base_weights = state["files"].get(BASE_LINK, t.base_weights)
    t.last_checkpoint = str(resume_from)
    log.info("resumed from %s at step %d", resume_from, t.step)


def check_weights_agree(s: Session, model: torch.nn.Module, step: int) -> None:
    """With several processes: every rank must hold the weights rank 0 is about to save (a broken invariant
    otherwise, e.g. a rank that skipped a step)."""
    if s.accelerator.num_processes == 1:
        return
    from accelerate.utils import gather_object

    digests = gather_object([weights_sha256(model)])  # sync point: one hash per process
    if len(set(digests)) != 1:
        raise RuntimeError(f"the {len(digests)} processes hold different weights at step {step}: {digests}")
    log.info("weights identical on all %d processes at step %d (sha256 %s...)", len(digests), step, digests[0][:12])


def save_training(s: Session, t: Training, tokenizer) -> None:
    """Main process saves; every process learns the outcome (a failed save stops all with the same line)."""
    model = s.accelerator.unwrap_model(t.loss_module).model  # a LoRA run's peft wrapper, adapters unmerged
    check_weights_agree(s, model, t.step)
    state = {"cursor": t.cursor.state_dict(), "tokens_seen": t.tokens_seen, "fingerprint": t.fingerprint,
             "replay_cursor": t.replay_cursor.state_dict() if t.replay_cursor is not None else None,
             "precision": s.precision.precision,
             "early_stop": {"best_loss": t.best_loss, "best_step": t.best_step,
                            "evals_since_best": t.evals_since_best}}
    linked = {BASE_LINK: t.base_weights} if t.adapter.needs_base else None

    def save() -> str:
        s.metrics.sync()  # every step this checkpoint holds is on record before it is named
        folder = save_checkpoint(s.out / CHECKPOINTS, t.step,
                                 lambda f: t.adapter.save_weights(model, tokenizer, f, s.out / BASE),
                                 t.optimizer, t.scheduler, state, s.cfg.checkpoint.keep_last, linked,
                                 best_step=t.best_step)
        return str(folder)

    t.last_checkpoint = on_main(s.accelerator, save)


def stop_reason(s: Session) -> str:
    return s.stop.signal_name or "a stop signal to another process"


def stopped_result(s: Session, run_folder: RunFolder | None, t: Training | None, stopped_by: str) -> dict:
    """The result of a session that stopped before the run's end, with the command that continues it."""
    cfg = s.cfg
    step, checkpoint = (t.step, t.last_checkpoint) if t is not None else (0, None)
    if stopped_by == "schedule.stop_after_steps":
        how = (f"to resume, run the same command with schedule.stop_after_steps=null (or a value above {step}); "
               "resume=auto, the default, continues from the checkpoint")
    elif checkpoint is None:
        how = "nothing was trained yet: run the same command again to start (resume=auto starts afresh)"
    else:
        how = "to resume, run the same command again (resume=auto, the default, continues from the checkpoint)"
    saved = f"checkpoint {checkpoint}" if checkpoint else "no checkpoint"
    if s.main:
        run_folder.finish("stopped", step=step, stopped_by=stopped_by, precision=s.precision.record())
    return {"out_dir": str(s.out), "step": step, "completed": False, "stopped_by": stopped_by,
            "checkpoint": checkpoint,
            "summary": [f"pretrain stopped ({stopped_by}) at step {step} of {cfg.schedule.max_steps}; {saved}",
                        f"  {how}, out_dir={s.out}"]}
