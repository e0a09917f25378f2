"""The continued-pretraining stage: run(cfg) -> result.

Read top to bottom: load the encoder, find the resume point and refuse a checkpoint of other settings (the run
fingerprint), load the data, warm up a missing MLM head, measure the base model and save step 0 (fresh runs only),
then one loop of optimizer steps with evaluation and checkpoints inline, then the final measurements and a plain
exported checkpoint.

SIGINT/SIGTERM are honoured in every phase: the current phase reaches its next safe point, the stage saves what a
restart needs (nothing before step 0; a checkpoint after it) and returns ``completed: False`` (the CLI exits with
its "stopped, resumable" code). With several processes the decision to stop is agreed by all ranks every step.
"""

from __future__ import annotations

import contextlib
import logging
import os
import time
from pathlib import Path

import torch
from accelerate import Accelerator, PartialState
from accelerate.state import AcceleratorState
from accelerate.utils import broadcast_object_list
from tqdm.auto import tqdm
from transformers import get_scheduler

from adapt.common.errors import ConfigError
from adapt.common.io import atomic_write_json
from adapt.common.runtime import PrecisionChoice, announce_precision, apply_threads, resolve_device, resolve_precision
from adapt.common.seeding import step_seed
from adapt.config.common import optional_str
from adapt.config.pretrain import PretrainJob, tracks_best
from adapt.contracts.manifest import RunFolder
from adapt.contracts.checkpoint import best_checkpoint, read_state
from adapt.contracts.run_folder import BASE, BEST, CHECKPOINTS, FINAL, METRICS, MetricsLog, ensure_writable
from adapt.training.adapters import Adapter, build_adapter, count_trainable
from adapt.training.encoder import attention_dropout_values, load_mlm, load_tokenizer
from adapt.training.early_stop import LOSS_KEY, judge, patience_spent
from adapt.training.base_model import (format_figures, measure_base, run_precision, start_figures,
                                       warm_up_missing_head, warmup_record)
from adapt.training.export import CI_HIGH, CI_LOW, export_checkpoint, export_saved, measure_pppl
from adapt.training.model_card import write_model_card
from adapt.training.mlm_loss import MaskedOnlyMlm, MaskingPlan, sparse_tied_embedding_grad
from adapt.training.optimizer import build_adamw
from adapt.training.packing import replay_rows
from adapt.training.ranks import on_main
from adapt.training.run_data import RunData, batch_cursors, load_run_data
from adapt.training.resume import (Session, Training, open_run, restore_training, save_training, stop_reason,
                                   stopped_result)
from adapt.training.stop_signal import StopSignal, agreed_stop
from adapt.training.tensorboard_log import TENSORBOARD, tensorboard_mirror

log = logging.getLogger(__name__)

EARLY_STOP = "early_stop"  # stopped_by of a run its early stop ended: complete, final/ and best/ written


FSDP_REFUSAL = ("FSDP is not supported by adapt-pretrain: its checkpoints save the whole model from rank 0 and load "
                "it into every process, which FSDP's sharded parameters do not allow; launch without FSDP "
                "(torchrun, or accelerate launch without --use_fsdp, run DDP: a full copy of the model per GPU)")


def _refuse_fsdp(accelerator: Accelerator | None = None) -> None:
    from accelerate.utils import DistributedType, str_to_bool

    asked = str_to_bool(os.environ.get("ACCELERATE_USE_FSDP", "false"))  # what accelerate launch --use_fsdp sets
    if asked or (accelerator is not None and accelerator.distributed_type == DistributedType.FSDP):
        raise ConfigError(FSDP_REFUSAL)


def _accelerator(cfg: PretrainJob) -> tuple[Accelerator, PrecisionChoice]:
    _refuse_fsdp()
    apply_threads(cfg.runtime)
    cpu = resolve_device(cfg.runtime).type == "cpu"
    state = PartialState(cpu=cpu)  # starts the process group, so that the processes can agree on the precision
    precision = resolve_precision(cfg.runtime, state.device, announce=False)
    if state.num_processes > 1:  # a timing probe may differ between processes: all autocast as rank 0 chose
        precision = broadcast_object_list([precision])[0]
    if state.is_main_process:
        announce_precision(precision)
    # accelerate keeps one AcceleratorState per process and refuses another mixed_precision in a second job of the
    # same interpreter; the process group (PartialState) is kept
    AcceleratorState._reset_state()
    accelerator = Accelerator(cpu=cpu, mixed_precision="bf16" if precision.precision == "bf16" else "no")
    _refuse_fsdp(accelerator)
    return accelerator, precision


def _set_up_training(s: Session, adapter: Adapter, model, data: RunData, resume_from: str | None,
                     fingerprint: dict, base_weights: dict | None) -> Training:
    cfg, accelerator = s.cfg, s.accelerator
    if resume_from is not None and adapter.needs_base:  # the frozen weights the checkpoint does not hold
        adapter.load_base(model, Path(resume_from).parent.parent / BASE)
    with torch.random.fork_rng():  # adapters that initialise weights (LoRA's A) draw from the run's seed
        torch.manual_seed(step_seed(cfg.seed, 0xADA7))
        model = adapter.apply(model, cfg.adapter)
    trainable, total = count_trainable(model)
    log.info("adapter %s: %d of %d parameters train (%.2f%%)", cfg.adapter.kind, trainable, total,
             100 * trainable / total)
    loss_module = MaskedOnlyMlm(model).to(accelerator.device)
    optimizer = build_adamw(model, cfg.schedule.learning_rate, cfg.schedule.weight_decay)
    sched = cfg.schedule
    scheduler = get_scheduler("constant_with_warmup" if sched.decay == "constant" else sched.decay, optimizer,
                              num_warmup_steps=sched.warmup_steps, num_training_steps=sched.max_steps)
    cursor, replay_cursor = batch_cursors(cfg, data, accelerator.process_index, accelerator.num_processes)
    t = Training(adapter, loss_module, optimizer, scheduler, cursor, trainable, total, fingerprint,
                 base_weights=base_weights, replay_cursor=replay_cursor)
    if resume_from is not None:
        restore_training(t, model, Path(resume_from))
    # wrap for several processes only after the state is restored into the plain modules
    t.loss_module, t.optimizer = accelerator.prepare(t.loss_module, t.optimizer)
    sparse_tied_embedding_grad(model)  # after the wrap: DDP keeps expecting the dense gradient it gets
    return t


def _optimizer_step(cfg: PretrainJob, t: Training, data: RunData, plan: MaskingPlan, accelerator: Accelerator,
                    params: list[torch.nn.Parameter]) -> tuple[float, float | None]:
    """grad_accum_steps micro-steps, then one optimizer step; returns (this process's loss, gradient norm)."""
    s, device, rank = cfg.schedule, accelerator.device, accelerator.process_index
    t.loss_module.train()
    step_loss = 0.0
    for micro in range(s.grad_accum_steps):
        ids, mask, starts = _micro_batch(cfg, t, data, t.step * s.grad_accum_steps + micro)
        g = torch.Generator().manual_seed(step_seed(cfg.seed, t.step, micro, rank))
        masked, labels = plan.apply(ids, mask, g, starts)
        torch.manual_seed(step_seed(cfg.seed, t.step, micro, rank, 1))  # dropout draws
        last = micro == s.grad_accum_steps - 1
        # no_sync: gradients are all-reduced across processes once, on the last micro-step only
        with contextlib.nullcontext() if last else accelerator.no_sync(t.loss_module):
            loss = t.loss_module(masked.to(device), mask.to(device), labels.to(device)) / s.grad_accum_steps
            accelerator.backward(loss)
        step_loss += float(loss.detach())
        # every process takes an equal share of the global batch, so this process's count × processes is the total
        t.tokens_seen += int(mask.sum()) * accelerator.num_processes
    grad_norm = float(accelerator.clip_grad_norm_(params, s.max_grad_norm)) if s.max_grad_norm > 0 else None
    t.optimizer.step()
    t.scheduler.step()
    t.optimizer.zero_grad(set_to_none=True)
    t.step += 1
    return step_loss, grad_norm


def _micro_batch(cfg: PretrainJob, t: Training, data: RunData, micro_index: int):
    """(ids, attention mask, word starts), each (B, T): this process's share of a micro-batch, the domain rows
    first, then the replay rows (replay.share of every batch, spread exactly over the run: packing.replay_rows)."""
    b = cfg.schedule.batch_size
    n_replay = replay_rows(cfg.replay.share, b, micro_index) if t.replay_cursor is not None else 0
    parts = [(data.train, t.cursor.next_indices(b - n_replay))]
    if n_replay:
        parts.append((data.replay, t.replay_cursor.next_indices(n_replay)))
    return tuple(torch.cat([getattr(seqs, name)[idx] for seqs, idx in parts])
                 for name in ("input_ids", "attention_mask", "word_starts"))


def _heldout(s: Session, t: Training, data: RunData) -> dict[str, float]:
    """Fixed-mask held-out losses, computed once on the main process (the unwrapped module: no collectives)."""
    module = s.accelerator.unwrap_model(t.loss_module)
    return on_main(s.accelerator, lambda: {f"heldout_loss_{k}": e.loss(module, s.accelerator.device,
                                                                         s.accelerator.autocast)
                                           for k, e in data.evals.items()})


def _train(s: Session, t: Training, data: RunData, plan: MaskingPlan, tokenizer) -> None:
    cfg, accelerator = s.cfg, s.accelerator
    sched = cfg.schedule
    stop_at = sched.stop_after_steps or sched.max_steps
    params = [p for p in t.loss_module.parameters() if p.requires_grad]
    t0, tokens_t0 = time.perf_counter(), t.tokens_seen
    if patience_spent(t.evals_since_best, cfg.early_stop.patience):  # resumed from its early stop's checkpoint
        t.stopped_by = EARLY_STOP
        return
    bar = tqdm(total=sched.max_steps, initial=t.step, desc="pretrain", unit="step",
               disable=not (cfg.runtime.progress and s.main))
    while t.step < stop_at:
        loss, grad_norm = _optimizer_step(cfg, t, data, plan, accelerator, params)
        # sync point: every rank learns whether any was asked to stop, and the mean loss over processes
        stop_now, (loss,) = agreed_stop(s.stop.requested, accelerator, loss)
        bar.update(1)
        bar.set_postfix(loss=f"{loss:.3f}")
        record = {"phase": "train", "step": t.step, "loss": loss,
                  "learning_rate": t.scheduler.get_last_lr()[0], "grad_norm": grad_norm,
                  "tokens_seen": t.tokens_seen,
                  "tokens_per_second": (t.tokens_seen - tokens_t0) / max(time.perf_counter() - t0, 1e-9)}
        improved = early = False
        if _evaluates(cfg, t.step):
            record.update(_heldout(s, t, data))
            log.info("step %d: %s", t.step, format_figures(record))
            improved, early = _judge(cfg, t, record[LOSS_KEY])
        if s.main:
            s.metrics.write(**record)
        every = cfg.checkpoint.save_every_steps
        if (every and t.step % every == 0) or t.step == stop_at or stop_now or improved or early:
            save_training(s, t, tokenizer)  # a new best step keeps its checkpoint out of rotation
        if stop_now:
            t.stopped_by = stop_reason(s)
            log.warning("process %d of %d: stopped after step %d (%s)", accelerator.process_index,
                        accelerator.num_processes, t.step, t.stopped_by)
            break
        if early:
            t.stopped_by = EARLY_STOP
            log.info("early stop after step %d: %d evaluations without an improvement of %g; best step %d "
                     "(%s %.4g)", t.step, t.evals_since_best, cfg.early_stop.min_improvement, t.best_step,
                     LOSS_KEY, t.best_loss)
            break
    bar.close()
    if t.stopped_by is None and t.step < sched.max_steps:
        t.stopped_by = "schedule.stop_after_steps"


def _evaluates(cfg: PretrainJob, step: int) -> bool:
    """Held-out loss every eval.every_steps steps; at the last step only when the best step is tracked (else
    the final measurement in _finish covers it)."""
    every, last = cfg.eval.every_steps, step == cfg.schedule.max_steps
    return bool(every) and (step % every == 0 or (last and tracks_best(cfg))) and (not last or tracks_best(cfg))


def _judge(cfg: PretrainJob, t: Training, loss: float) -> tuple[bool, bool]:
    """(new best step, stop early now), updating the early-stopping state. Every rank holds the same loss."""
    if not tracks_best(cfg):
        return False, False
    verdict = judge(loss, t.best_loss, t.evals_since_best, cfg.early_stop.min_improvement, cfg.early_stop.patience)
    t.evals_since_best = verdict.evals_since_best
    if verdict.improved:
        t.best_loss, t.best_step = loss, t.step
    return verdict.improved, verdict.stop and t.step < cfg.schedule.max_steps


def _best_figures(s: Session, t: Training) -> dict | None:
    """The best step, its checkpoint and its held-out figures (as metrics.jsonl recorded them); None when the
    run does not track it."""
    if not tracks_best(s.cfg) or t.best_step is None:
        return None
    folder = best_checkpoint(s.out / CHECKPOINTS)
    if folder is None or read_state(folder)["step"] != t.best_step:
        raise RuntimeError(f"the best step {t.best_step} has no checkpoint in {s.out / CHECKPOINTS} (index.json)")
    record = next(r for r in s.metrics.read() if r.get("phase") == "train" and r.get("step") == t.best_step)
    return {"step": t.best_step, "folder": BEST, "checkpoint": str(folder),
            "heldout": {k: v for k, v in record.items() if k.startswith("heldout_")}}


def _finish(s: Session, t: Training, data: RunData, tokenizer, head_report) -> dict | None:
    """Final held-out figures, then final/ (adapters merged) with its model card, and result.json. None when a
    stop arrived during the final evaluation: the last checkpoint is complete, a restart finishes from it."""
    cfg, accelerator = s.cfg, s.accelerator
    module = accelerator.unwrap_model(t.loss_module)
    end = _heldout(s, t, data)
    final_model = t.adapter.export(module.model)
    end.update(on_main(accelerator, lambda: measure_pppl(final_model, tokenizer, data.pppl_texts, cfg,
                                                         run_precision(accelerator))))
    if s.stop_agreed():
        t.stopped_by = stop_reason(s)
        return None
    sched = cfg.schedule
    result = {"out_dir": str(s.out), "step": t.step, "completed": True, "stopped_by": t.stopped_by,
              "tokens_seen": t.tokens_seen, "trainable_parameters": t.trainable, "total_parameters": t.total,
              "num_processes": accelerator.num_processes,
              "effective_batch_size": sched.batch_size * sched.grad_accum_steps * accelerator.num_processes,
              "precision": s.precision.precision, "attention_dropout": attention_dropout_values(final_model),
              "head_missing": head_report.missing,
              "head_warmup": warmup_record(s.metrics), "start": start_figures(s.metrics), "end": end,
              "best": on_main(accelerator, lambda: _best_figures(s, t))}

    def write() -> None:  # a signal from here on lets the export finish: the run is then complete
        s.metrics.write(phase="end", step=t.step, **end)
        export_checkpoint(final_model, tokenizer, s.out / FINAL,
                          extra=lambda f: write_model_card(f, cfg, result, FINAL))
        if result["best"] is not None:  # the best step's checkpoint files, exactly (adapters merged)
            export_saved(Path(result["best"]["checkpoint"]), s.out / BEST,
                         extra=lambda f: write_model_card(f, cfg, result, BEST))
        write_model_card(s.out / BASE, cfg, result, BASE)
        atomic_write_json(s.out / "result.json", result)

    on_main(accelerator, write)
    return result


def run(cfg: PretrainJob) -> dict:
    out = Path(cfg.out_dir)
    ensure_writable(out, "out_dir")
    with StopSignal() as stop:  # from here on SIGINT/SIGTERM stop the run at its next safe point
        accelerator, precision = _accelerator(cfg)
        return _run(Session(cfg, accelerator, precision, stop, out, MetricsLog(out / METRICS)))


def _run(s: Session) -> dict:
    cfg, accelerator = s.cfg, s.accelerator
    tokenizer = load_tokenizer(cfg.encoder)
    model, head_report = load_mlm(cfg.encoder, attention_dropout=cfg.encoder.attention_dropout)
    adapter = build_adapter(cfg.adapter.kind)
    adapter.check(model, cfg.adapter)  # before the corpus is read
    resume_from, fingerprint = on_main(accelerator, lambda: open_run(s, model, tokenizer, adapter))
    if s.main:  # rank 0 mirrors metrics.jsonl into TensorBoard event files (when tensorboard is installed)
        s.metrics.mirror = tensorboard_mirror(s.out / TENSORBOARD,
                                              s.metrics.trained_steps() if resume_from else None)
    general_dir = optional_str(cfg.general_dir)
    run_folder = RunFolder(s.out, "pretrain", cfg, [cfg.corpus_dir] + ([general_dir] if general_dir else []),
                           cfg.seed) if s.main else None
    m = cfg.masking
    plan = MaskingPlan(tokenizer, m.rate, m.mask_share, m.random_share, m.unit)
    data = load_run_data(cfg, tokenizer, plan, accelerator.num_processes)
    model.to(accelerator.device)
    base_weights = None
    if resume_from is None:  # a resumed run warmed up and measured its base when it started
        if s.stop_agreed():  # safe point: after tokenising (nothing to save yet)
            return stopped_result(s, run_folder, None, stop_reason(s))
        warm_up_missing_head(s, model, head_report, data, plan)
        if s.stop_agreed():  # safe point: after the warm-up (a restart warms up again)
            return stopped_result(s, run_folder, None, stop_reason(s))
        base_weights = measure_base(s, model, tokenizer, data)
    t = _set_up_training(s, adapter, model, data, resume_from, fingerprint, base_weights)
    if resume_from is None:
        save_training(s, t, tokenizer)  # step 0: a restart never repeats the warm-up and the base measurement
    if s.stop_agreed():  # safe point: before the first step, with a checkpoint to resume from
        return stopped_result(s, run_folder, t, stop_reason(s))
    _train(s, t, data, plan, tokenizer)
    result = _finish(s, t, data, tokenizer, head_report) if t.stopped_by in (None, EARLY_STOP) else None
    if result is None:
        return stopped_result(s, run_folder, t, t.stopped_by)
    if s.main:
        run_folder.finish("completed", step=t.step, precision=s.precision.record())
    result["summary"] = _summary(result)
    return result


def _summary(result: dict) -> list[str]:
    lines = [f"pretrain: {result['step']} steps, {result['tokens_seen']:,} tokens seen, "
             f"{result['trainable_parameters']:,} trainable parameters"]
    def figure(d: dict, key: str) -> str:
        low, high = d.get(f"{key}{CI_LOW}"), d.get(f"{key}{CI_HIGH}")
        return f"{d[key]:.4g}" + (f" ({low:.4g}-{high:.4g})" if low is not None and high is not None else "")

    for key in sorted(k for k in result["end"] if not k.endswith((CI_LOW, CI_HIGH))):
        lines.append(f"  {key:<28} base {figure(result['start'], key)} -> adapted {figure(result['end'], key)}"
                     if key in result["start"] else f"  {key:<28} adapted {figure(result['end'], key)}")
    if result.get("stopped_by") == EARLY_STOP:
        lines.append(f"  stopped early at step {result['step']}: the domain held-out loss stopped improving")
    lines.append(f"  adapted checkpoint: {Path(result['out_dir']) / FINAL}")
    if result.get("best"):
        lines.append(f"  best checkpoint (step {result['best']['step']}, lowest {LOSS_KEY}): "
                     f"{Path(result['out_dir']) / BEST}")
    return lines
