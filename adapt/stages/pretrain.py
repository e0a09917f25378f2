"""The continued-pretraining stage: run(cfg) -> result.

Read top to bottom: set up the run folder and resume point, load encoder and data, warm up a missing MLM head and
measure the base model (fresh runs only), then one loop of optimizer steps with evaluation and checkpoints inline,
then the final measurements and a plain exported checkpoint.
"""

from __future__ import annotations

import contextlib
import logging
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import torch
from accelerate import Accelerator, PartialState
from accelerate.utils import broadcast_object_list
from tqdm.auto import tqdm
from transformers import get_scheduler

from adapt.common.errors import ConfigError, InputError
from adapt.common.io import atomic_write_json
from adapt.common.runtime import PrecisionChoice, announce_precision, apply_threads, resolve_device, resolve_precision
from adapt.common.seeding import step_seed
from adapt.config.common import optional_str
from adapt.config.pretrain import PretrainJob
from adapt.contracts.checkpoint import find_resume_point, load_checkpoint, save_checkpoint
from adapt.contracts.manifest import RunFolder
from adapt.contracts.prepared_corpus import read_prepared
from adapt.contracts.run_folder import MetricsLog
from adapt.training.adapters import Adapter, build_adapter, count_trainable
from adapt.training.encoder import load_mlm, load_tokenizer, unwrap_peft
from adapt.training.export import export_checkpoint, measure_pppl, write_model_card
from adapt.training.head_warmup import warm_up_head
from adapt.training.mlm_loss import FixedMaskEval, MaskedOnlyMlm, MaskingPlan
from adapt.training.optimizer import build_adamw
from adapt.training.packing import BatchCursor, PackedSequences, pack_documents
from adapt.training.stop_signal import StopSignal

log = logging.getLogger(__name__)


def _accelerator(cfg: PretrainJob) -> tuple[Accelerator, PrecisionChoice]:
    apply_threads(cfg.runtime)
    cpu = resolve_device(cfg.runtime).type == "cpu"
    state = PartialState(cpu=cpu)  # starts the process group, so that the processes can agree on the precision
    precision = resolve_precision(cfg.runtime, state.device, announce=False)
    if state.num_processes > 1:  # a timing probe may differ between processes: all autocast as rank 0 chose
        precision = broadcast_object_list([precision])[0]
    if state.is_main_process:
        announce_precision(precision)
    return Accelerator(cpu=cpu, mixed_precision="bf16" if precision.precision == "bf16" else "no"), precision


def _precision(accelerator: Accelerator) -> str:
    """The resolved precision the run's Accelerator autocasts in, for the pseudo-perplexity passes."""
    return "bf16" if accelerator.mixed_precision == "bf16" else "fp32"


@dataclass
class RunData:
    """Token ids packed once per process; the fixed-mask held-out sets; the texts for pseudo-perplexity."""

    train: PackedSequences
    evals: dict[str, FixedMaskEval]
    pppl_texts: dict[str, list[str]]


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
    step: int = 0
    tokens_seen: int = 0


def _load_split(corpus_dir: str, split: str, tokenizer, cfg: PretrainJob, key: str):
    docs = read_prepared(corpus_dir, split, columns=None)
    seqs = pack_documents([d["text"] for d in docs], tokenizer, cfg.encoder.max_seq_len, cfg.runtime.progress)
    if len(seqs) == 0:
        raise InputError(f"{key}={corpus_dir}: the {split} split has no text to train or evaluate on")
    return docs, seqs


def _load_data(cfg: PretrainJob, tokenizer, plan: MaskingPlan, num_processes: int) -> RunData:
    """Read and pack the corpus. Every process packs the whole corpus itself (and again on resume): the cursor
    then picks each process's share of a batch by index, so no tensors cross processes."""
    general_dir = optional_str(cfg.general_dir)
    _, train = _load_split(cfg.corpus_dir, "train", tokenizer, cfg, "corpus_dir")
    heldout_docs, heldout = _load_split(cfg.corpus_dir, "heldout", tokenizer, cfg, "corpus_dir")
    if len(train) < cfg.schedule.batch_size * num_processes:
        raise ConfigError(f"schedule.batch_size={cfg.schedule.batch_size} × {num_processes} process(es) exceeds "
                          f"the {len(train)} packed training sequences in {cfg.corpus_dir}; lower "
                          "schedule.batch_size or add text")
    sets = {"domain": (heldout_docs, heldout)}
    if general_dir:
        sets["general"] = _load_split(general_dir, "heldout", tokenizer, cfg, "general_dir")
    # the same seed draws the same fixed mask at every start and resume, so held-out figures stay comparable
    evals = {name: FixedMaskEval(seqs, plan, cfg.seed, cfg.eval.max_heldout_seqs, cfg.schedule.batch_size)
             for name, (_, seqs) in sets.items()}
    texts = {name: [d["text"] for d in docs] for name, (docs, _) in sets.items()}
    return RunData(train, evals, texts)


def _warm_up_head(cfg: PretrainJob, model, head_report, data: RunData, plan: MaskingPlan,
                  accelerator: Accelerator, metrics: MetricsLog) -> None:
    warm = cfg.head_warmup
    if not (warm.when == "always" or (warm.when == "auto" and head_report.needs_warmup)):
        return
    if warm.steps == 0 and head_report.needs_warmup:
        log.warning("the MLM head is untrained and head_warmup.steps=0: base figures are meaningless")
    main = accelerator.is_main_process
    losses, converged = warm_up_head(
        model, data.train, plan, steps=warm.steps, learning_rate=warm.learning_rate, batch_size=warm.batch_size,
        seed=cfg.seed, device=accelerator.device, autocast=accelerator.autocast,
        progress=cfg.runtime.progress and main, min_improvement=warm.min_improvement, window_steps=warm.window_steps)
    if not (main and losses):
        return
    metrics.write(phase="head_warmup", steps=len(losses), first_loss=losses[0], last_loss=losses[-1],
                  converged=converged, losses=losses)
    if not converged and warm.min_improvement > 0:
        log.warning("the MLM head was still improving after head_warmup.steps=%d (loss %.3f -> %.3f): base figures "
                    "may be too pessimistic; raise head_warmup.steps", len(losses), losses[0], losses[-1])


def _measure_base(cfg: PretrainJob, model, tokenizer, data: RunData, accelerator: Accelerator,
                  metrics: MetricsLog, out: Path) -> None:
    """The fair "base": the original encoder with the warmed head, nothing else changed; saved as base/."""
    if not accelerator.is_main_process:
        return
    export_checkpoint(model, tokenizer, out / "base")
    loss_module = MaskedOnlyMlm(model)
    start = {f"heldout_loss_{k}": e.loss(loss_module, accelerator.device, accelerator.autocast)
             for k, e in data.evals.items()}
    start.update(measure_pppl(model, tokenizer, data.pppl_texts, cfg, _precision(accelerator)))
    metrics.write(phase="start", step=0, **start)
    log.info("base model: %s", _fmt(start))


def _set_up_training(cfg: PretrainJob, model, data: RunData, accelerator: Accelerator,
                     resume_from: Path | None) -> Training:
    adapter = build_adapter(cfg.adapter.kind)
    model = adapter.apply(model, cfg.adapter)
    trainable, total = count_trainable(model)
    log.info("adapter %s: %d of %d parameters train (%.2f%%)", cfg.adapter.kind, trainable, total,
             100 * trainable / total)
    loss_module = MaskedOnlyMlm(model).to(accelerator.device)
    optimizer = build_adamw(model, cfg.schedule.learning_rate, cfg.schedule.weight_decay)
    s = cfg.schedule
    scheduler = get_scheduler("constant_with_warmup" if s.decay == "constant" else s.decay, optimizer,
                              num_warmup_steps=s.warmup_steps, num_training_steps=s.max_steps)
    cursor = BatchCursor(len(data.train), s.batch_size, cfg.seed, accelerator.process_index,
                         accelerator.num_processes)
    t = Training(adapter, loss_module, optimizer, scheduler, cursor, trainable, total)
    if resume_from is not None:
        _restore(t, resume_from)
    # wrap for several processes only after the state is restored into the plain modules
    t.loss_module, t.optimizer = accelerator.prepare(t.loss_module, t.optimizer)
    return t


def _restore(t: Training, resume_from: Path) -> None:
    state = load_checkpoint(resume_from, t.loss_module.model, t.optimizer, t.scheduler)
    try:
        t.cursor.load_state_dict(state["cursor"])
    except RuntimeError as exc:
        raise ConfigError(f"resume from {resume_from}: {exc}; resume with the same settings or start a new "
                          "out_dir") from exc
    t.step, t.tokens_seen = state["step"], state["tokens_seen"]
    log.info("resumed from %s at step %d", resume_from, t.step)


def _checkpoint(cfg: PretrainJob, t: Training, accelerator: Accelerator, ckpt_dir: Path) -> None:
    accelerator.wait_for_everyone()  # sync point: every rank has finished the step being saved
    if accelerator.is_main_process:
        model = unwrap_peft(accelerator.unwrap_model(t.loss_module).model)
        save_checkpoint(ckpt_dir, t.step, model, t.optimizer, t.scheduler,
                        {"cursor": t.cursor.state_dict(), "tokens_seen": t.tokens_seen, "seed": cfg.seed,
                         "adapter": cfg.adapter.kind}, cfg.checkpoint.keep_last)


def _optimizer_step(cfg: PretrainJob, t: Training, data: RunData, plan: MaskingPlan, accelerator: Accelerator,
                    params: list[torch.nn.Parameter]) -> tuple[float, float | None]:
    """grad_accum_steps micro-steps, then one optimizer step; returns (loss, gradient norm)."""
    s, device, rank = cfg.schedule, accelerator.device, accelerator.process_index
    t.loss_module.train()
    step_loss = 0.0
    for micro in range(s.grad_accum_steps):
        idx = t.cursor.next_indices()
        ids, mask = data.train.input_ids[idx], data.train.attention_mask[idx]  # (B, T) this process's share
        g = torch.Generator().manual_seed(step_seed(cfg.seed, t.step, micro, rank))
        masked, labels = plan.apply(ids, mask, g)
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
    if accelerator.num_processes > 1:  # sync point: log the mean over processes, not rank 0's share
        step_loss = float(accelerator.reduce(torch.tensor(step_loss, device=device), "mean"))
    return step_loss, grad_norm


def _train(cfg: PretrainJob, t: Training, data: RunData, plan: MaskingPlan, accelerator: Accelerator,
           metrics: MetricsLog, ckpt_dir: Path) -> None:
    s, main = cfg.schedule, accelerator.is_main_process
    stop_at = s.stop_after_steps or s.max_steps
    params = [p for p in t.loss_module.parameters() if p.requires_grad]
    t0, tokens_t0 = time.perf_counter(), t.tokens_seen
    bar = tqdm(total=s.max_steps, initial=t.step, desc="pretrain", unit="step",
               disable=not (cfg.runtime.progress and main))
    with StopSignal() as stop:
        while t.step < stop_at and not stop.requested:
            loss, grad_norm = _optimizer_step(cfg, t, data, plan, accelerator, params)
            bar.update(1)
            bar.set_postfix(loss=f"{loss:.3f}")
            record = {"phase": "train", "step": t.step, "loss": loss,
                      "learning_rate": t.scheduler.get_last_lr()[0], "grad_norm": grad_norm,
                      "tokens_seen": t.tokens_seen,
                      "tokens_per_second": (t.tokens_seen - tokens_t0) / max(time.perf_counter() - t0, 1e-9)}
            if cfg.eval.every_steps and t.step % cfg.eval.every_steps == 0 and t.step < s.max_steps:
                record.update({f"heldout_loss_{k}": e.loss(t.loss_module, accelerator.device, accelerator.autocast)
                               for k, e in data.evals.items()})
                log.info("step %d: %s", t.step, _fmt(record))
            if main:
                metrics.write(**record)
            every = cfg.checkpoint.save_every_steps
            if (every and t.step % every == 0) or t.step == stop_at or stop.requested:
                _checkpoint(cfg, t, accelerator, ckpt_dir)
    bar.close()


def _finish(cfg: PretrainJob, t: Training, data: RunData, tokenizer, head_report, accelerator: Accelerator,
            metrics: MetricsLog, out: Path) -> dict:
    """Final held-out figures, then final/ (adapters merged) with its model card, and result.json."""
    main = accelerator.is_main_process
    end = {f"heldout_loss_{k}": e.loss(t.loss_module, accelerator.device, accelerator.autocast)
           for k, e in data.evals.items()}
    final_model = t.adapter.export(accelerator.unwrap_model(t.loss_module).model)
    end.update(measure_pppl(final_model, tokenizer, data.pppl_texts, cfg, _precision(accelerator)) if main else {})
    result = {"out_dir": str(out), "step": t.step, "completed": True, "tokens_seen": t.tokens_seen,
              "trainable_parameters": t.trainable, "total_parameters": t.total,
              "head_missing": head_report.missing, "start": _start_figures(metrics), "end": end}
    if main:
        metrics.write(phase="end", step=t.step, **end)
        export_checkpoint(final_model, tokenizer, out / "final")
        write_model_card(out / "final", cfg, result)
        atomic_write_json(out / "result.json", result)
    return result


def run(cfg: PretrainJob) -> dict:
    out = Path(cfg.out_dir)
    ckpt_dir = out / "checkpoints"
    resume_from = find_resume_point(cfg.resume, ckpt_dir)
    accelerator, precision = _accelerator(cfg)
    main = accelerator.is_main_process
    general_dir = optional_str(cfg.general_dir)
    run_folder = RunFolder(out, "pretrain", cfg, [cfg.corpus_dir] + ([general_dir] if general_dir else []),
                           cfg.seed) if main else None
    metrics = MetricsLog(out / "metrics.jsonl")

    tokenizer = load_tokenizer(cfg.encoder)
    model, head_report = load_mlm(cfg.encoder)
    m = cfg.masking
    plan = MaskingPlan(tokenizer, m.rate, m.mask_share, m.random_share)
    data = _load_data(cfg, tokenizer, plan, accelerator.num_processes)
    model.to(accelerator.device)
    if resume_from is None:  # a resumed run measured its base when it started
        _warm_up_head(cfg, model, head_report, data, plan, accelerator, metrics)
        _measure_base(cfg, model, tokenizer, data, accelerator, metrics, out)

    t = _set_up_training(cfg, model, data, accelerator, resume_from)
    _train(cfg, t, data, plan, accelerator, metrics, ckpt_dir)
    if t.step < cfg.schedule.max_steps:
        if main:
            run_folder.finish("stopped", step=t.step, precision=precision.record())
        return {"out_dir": str(out), "step": t.step, "completed": False,
                "summary": [f"stopped at step {t.step} of {cfg.schedule.max_steps}; resume with resume=auto "
                            f"out_dir={out}"]}
    result = _finish(cfg, t, data, tokenizer, head_report, accelerator, metrics, out)
    if main:
        run_folder.finish("completed", step=t.step, precision=precision.record())
    result["summary"] = _summary(result)
    return result


def _start_figures(metrics: MetricsLog) -> dict:
    starts = [r for r in metrics.read() if r.get("phase") == "start"]
    return {k: v for k, v in starts[-1].items() if k.startswith(("heldout_", "pppl_"))} if starts else {}


def _fmt(record: dict) -> str:
    return ", ".join(f"{k}={v:.4g}" for k, v in record.items() if isinstance(v, float))


def _summary(result: dict) -> list[str]:
    lines = [f"pretrain: {result['step']} steps, {result['tokens_seen']:,} tokens seen, "
             f"{result['trainable_parameters']:,} trainable parameters"]
    for key in sorted(result["end"]):
        before = result["start"].get(key)
        after = result["end"][key]
        lines.append(f"  {key:<28} base {before:.4g} -> adapted {after:.4g}" if before is not None
                     else f"  {key:<28} adapted {after:.4g}")
    lines.append(f"  adapted checkpoint: {Path(result['out_dir']) / 'final'}")
    return lines
