"""The continued-pretraining stage: run(cfg) -> result.

Read top to bottom: set up the run folder and resume point, load encoder and data, warm up a missing MLM head and
measure the base model (fresh runs only), then one loop of optimizer steps with evaluation and checkpoints inline,
then the final measurements and a plain exported checkpoint.
"""

from __future__ import annotations

import contextlib
import logging
import time
from pathlib import Path

import torch
from accelerate import Accelerator
from tqdm.auto import tqdm
from transformers import get_scheduler

from adapt.training.adapters import build_adapter, count_trainable
from adapt.training.packing import BatchCursor, pack_documents
from adapt.contracts.checkpoint import find_resume_point, load_checkpoint, save_checkpoint
from adapt.config.common import optional_str
from adapt.config.pretrain import PretrainJob
from adapt.training.encoder import load_mlm, load_tokenizer
from adapt.common.errors import ConfigError, InputError
from adapt.common.seeding import step_seed
from adapt.training.encoder import unwrap_peft
from adapt.training.head_warmup import warm_up_head
from adapt.training.mlm_loss import FixedMaskEval, MaskedOnlyMlm, MaskingPlan
from adapt.training.stop_signal import StopSignal
from adapt.training.export import export_checkpoint, measure_pppl, write_model_card
from adapt.contracts.run_folder import MetricsLog
from adapt.contracts.manifest import RunFolder
from adapt.common.io import atomic_write_json
from adapt.common.runtime import apply_threads, resolve_device
from adapt.contracts.prepared_corpus import read_prepared

log = logging.getLogger(__name__)


def _accelerator(cfg: PretrainJob) -> Accelerator:
    apply_threads(cfg.runtime)
    return Accelerator(cpu=resolve_device(cfg.runtime).type == "cpu", mixed_precision="bf16" if cfg.runtime.precision == "bf16" else "no")


def _load_split(corpus_dir: str, split: str, tokenizer, cfg: PretrainJob, key: str):
    docs = read_prepared(corpus_dir, split, columns=None)
    seqs = pack_documents([d["text"] for d in docs], tokenizer, cfg.encoder.max_seq_len, cfg.runtime.progress)
    if len(seqs) == 0:
        raise InputError(f"{key}={corpus_dir}: the {split} split has no text to train or evaluate on")
    return docs, seqs


def _optimizer(model: torch.nn.Module, cfg: PretrainJob) -> torch.optim.Optimizer:
    decay, no_decay = [], []
    for name, param in model.named_parameters():
        if param.requires_grad:  # no weight decay on biases and norms (common practice)
            (no_decay if param.ndim < 2 else decay).append(param)
    groups = [{"params": decay, "weight_decay": cfg.schedule.weight_decay},
              {"params": no_decay, "weight_decay": 0.0}]
    # the fused kernel is several times faster on CPU and GPU, and deterministic
    fused = next(model.parameters()).device.type in ("cpu", "cuda")
    return torch.optim.AdamW(groups, lr=cfg.schedule.learning_rate, fused=fused)


def run(cfg: PretrainJob) -> dict:
    out = Path(cfg.out_dir)
    ckpt_dir = out / "checkpoints"
    resume_from = find_resume_point(cfg.resume, ckpt_dir)
    general_dir = optional_str(cfg.general_dir)
    accelerator = _accelerator(cfg)
    main = accelerator.is_main_process
    run_folder = RunFolder(out, "pretrain", cfg, [cfg.corpus_dir] + ([general_dir] if general_dir else []),
                           cfg.seed) if main else None
    metrics = MetricsLog(out / "metrics.jsonl")
    device, autocast = accelerator.device, accelerator.autocast

    tokenizer = load_tokenizer(cfg.encoder)
    model, head_report = load_mlm(cfg.encoder)
    _, train = _load_split(cfg.corpus_dir, "train", tokenizer, cfg, "corpus_dir")
    heldout_docs, heldout = _load_split(cfg.corpus_dir, "heldout", tokenizer, cfg, "corpus_dir")
    general_docs, general = _load_split(general_dir, "heldout", tokenizer, cfg, "general_dir") if general_dir \
        else ([], None)
    if len(train) < cfg.schedule.batch_size * accelerator.num_processes:
        raise ConfigError(f"schedule.batch_size={cfg.schedule.batch_size} × {accelerator.num_processes} "
                          f"process(es) exceeds the {len(train)} packed training sequences in {cfg.corpus_dir}; "
                          "lower schedule.batch_size or add text")
    m = cfg.masking
    plan = MaskingPlan(tokenizer, m.rate, m.mask_share, m.random_share)
    evals = {"domain": FixedMaskEval(heldout, plan, cfg.seed, cfg.eval.max_heldout_seqs, cfg.schedule.batch_size)}
    if general is not None:
        evals["general"] = FixedMaskEval(general, plan, cfg.seed, cfg.eval.max_heldout_seqs, cfg.schedule.batch_size)
    pppl_texts = {"domain": [d["text"] for d in heldout_docs]}
    if general_docs:
        pppl_texts["general"] = [d["text"] for d in general_docs]
    model.to(device)

    if resume_from is None:
        warm = cfg.head_warmup
        if warm.when == "always" or (warm.when == "auto" and head_report.needs_warmup):
            if warm.steps == 0 and head_report.needs_warmup:
                log.warning("the MLM head is untrained and head_warmup.steps=0: base figures are meaningless")
            losses, converged = warm_up_head(
                model, train, plan, steps=warm.steps, learning_rate=warm.learning_rate, batch_size=warm.batch_size,
                seed=cfg.seed, device=device, autocast=autocast, progress=cfg.runtime.progress and main,
                min_improvement=warm.min_improvement, window_steps=warm.window_steps)
            if main and losses:
                metrics.write(phase="head_warmup", steps=len(losses), first_loss=losses[0], last_loss=losses[-1],
                              converged=converged, losses=losses)
                if not converged and warm.min_improvement > 0:
                    log.warning("the MLM head was still improving after head_warmup.steps=%d (loss %.3f -> %.3f): "
                                "base figures may be too pessimistic; raise head_warmup.steps", len(losses),
                                losses[0], losses[-1])
        if main:  # the fair "base": original encoder, warmed head, nothing else changed
            export_checkpoint(model, tokenizer, out / "base")
            loss_module = MaskedOnlyMlm(model)
            start = {f"heldout_loss_{k}": e.loss(loss_module, device, autocast) for k, e in evals.items()}
            start.update(measure_pppl(model, tokenizer, pppl_texts, cfg))
            metrics.write(phase="start", step=0, **start)
            log.info("base model: %s", _fmt(start))

    adapter = build_adapter(cfg.adapter.kind)
    model = adapter.apply(model, cfg.adapter)
    trainable, total = count_trainable(model)
    log.info("adapter %s: %d of %d parameters train (%.2f%%)", cfg.adapter.kind, trainable, total,
             100 * trainable / total)
    loss_module = MaskedOnlyMlm(model).to(device)
    optimizer = _optimizer(model, cfg)
    s = cfg.schedule
    scheduler = get_scheduler("constant_with_warmup" if s.decay == "constant" else s.decay, optimizer,
                              num_warmup_steps=s.warmup_steps, num_training_steps=s.max_steps)
    cursor = BatchCursor(len(train), s.batch_size, cfg.seed, accelerator.process_index, accelerator.num_processes)
    step, tokens_seen = 0, 0
    if resume_from is not None:
        state = load_checkpoint(resume_from, model, optimizer, scheduler)
        try:
            cursor.load_state_dict(state["cursor"])
        except RuntimeError as exc:
            raise ConfigError(f"resume from {resume_from}: {exc}; resume with the same settings or start a new "
                              "out_dir") from exc
        step, tokens_seen = state["step"], state["tokens_seen"]
        log.info("resumed from %s at step %d", resume_from, step)
    loss_module, optimizer = accelerator.prepare(loss_module, optimizer)

    def checkpoint_now() -> None:
        accelerator.wait_for_everyone()
        if main:
            save_checkpoint(ckpt_dir, step, unwrap_peft(accelerator.unwrap_model(loss_module).model), optimizer,
                            scheduler, {"cursor": cursor.state_dict(), "tokens_seen": tokens_seen,
                                        "seed": cfg.seed, "adapter": cfg.adapter.kind}, cfg.checkpoint.keep_last)

    stop_at = s.stop_after_steps or s.max_steps
    params = [p for p in model.parameters() if p.requires_grad]
    t0, tokens_t0 = time.perf_counter(), tokens_seen
    bar = tqdm(total=s.max_steps, initial=step, desc="pretrain", unit="step", disable=not (cfg.runtime.progress and main))
    with StopSignal() as stop:
        while step < stop_at and not stop.requested:
            loss_module.train()
            step_loss = 0.0
            for micro in range(s.grad_accum_steps):
                idx = cursor.next_indices()
                ids, mask = train.input_ids[idx], train.attention_mask[idx]
                g = torch.Generator().manual_seed(step_seed(cfg.seed, step, micro, accelerator.process_index))
                masked, labels = plan.apply(ids, mask, g)
                torch.manual_seed(step_seed(cfg.seed, step, micro, accelerator.process_index, 1))  # dropout
                last = micro == s.grad_accum_steps - 1
                with contextlib.nullcontext() if last else accelerator.no_sync(loss_module):
                    loss = loss_module(masked.to(device), mask.to(device), labels.to(device)) / s.grad_accum_steps
                    accelerator.backward(loss)
                step_loss += float(loss.detach())
                tokens_seen += int(mask.sum()) * accelerator.num_processes
            grad_norm = float(accelerator.clip_grad_norm_(params, s.max_grad_norm)) if s.max_grad_norm > 0 else None
            optimizer.step()
            scheduler.step()
            optimizer.zero_grad(set_to_none=True)
            step += 1
            if accelerator.num_processes > 1:  # log the mean over processes, not rank 0's share
                step_loss = float(accelerator.reduce(torch.tensor(step_loss, device=device), "mean"))
            bar.update(1)
            bar.set_postfix(loss=f"{step_loss:.3f}")
            record = {"phase": "train", "step": step, "loss": step_loss, "learning_rate": scheduler.get_last_lr()[0],
                      "grad_norm": grad_norm, "tokens_seen": tokens_seen,
                      "tokens_per_second": (tokens_seen - tokens_t0) / max(time.perf_counter() - t0, 1e-9)}
            if cfg.eval.every_steps and step % cfg.eval.every_steps == 0 and step < s.max_steps:
                record.update({f"heldout_loss_{k}": e.loss(loss_module, device, autocast) for k, e in evals.items()})
                log.info("step %d: %s", step, _fmt(record))
            if main:
                metrics.write(**record)
            if (cfg.checkpoint.save_every_steps and step % cfg.checkpoint.save_every_steps == 0) \
                    or step == stop_at or stop.requested:
                checkpoint_now()
    bar.close()

    if step < s.max_steps:
        if main:
            run_folder.finish("stopped", step=step)
        return {"out_dir": str(out), "step": step, "completed": False,
                "summary": [f"stopped at step {step} of {s.max_steps}; resume with resume=auto out_dir={out}"]}

    end = {f"heldout_loss_{k}": e.loss(loss_module, device, autocast) for k, e in evals.items()}
    final_model = adapter.export(accelerator.unwrap_model(loss_module).model)
    end.update(measure_pppl(final_model, tokenizer, pppl_texts, cfg) if main else {})
    result = {"out_dir": str(out), "step": step, "completed": True, "tokens_seen": tokens_seen,
              "trainable_parameters": trainable, "total_parameters": total, "head_missing": head_report.missing,
              "start": _start_figures(metrics), "end": end}
    if main:
        metrics.write(phase="end", step=step, **end)
        export_checkpoint(final_model, tokenizer, out / "final")
        write_model_card(out / "final", cfg, result)
        atomic_write_json(out / "result.json", result)
        run_folder.finish("completed", step=step)
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
