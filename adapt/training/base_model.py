"""The fair base of a pretrain run: the original encoder with a warmed MLM head, measured and saved as base/.

A checkpoint that lacks its MLM head (or part of it) would otherwise be measured with a random head, and the
base-vs-adapted gap would partly measure head training. The main process warms the head up on cached encoder
states (``adapt.training.head_warmup``), every process takes its weights, and the base figures (held-out MLM loss
on each evaluation corpus, pseudo-perplexity where asked) are written to metrics.jsonl as the "start" record.
"""

from __future__ import annotations

import logging

from accelerate import Accelerator

from adapt.common.errors import InputError
from adapt.contracts.run_folder import BASE, MetricsLog
from adapt.training.encoder import HeadReport, head_parameter_names
from adapt.training.export import export_checkpoint, measure_pppl
from adapt.training.head_warmup import warm_up_head
from adapt.training.mlm_loss import MaskedOnlyMlm, MaskingPlan
from adapt.training.ranks import broadcast_parameters, on_main
from adapt.training.resume import Session
from adapt.training.run_data import RunData

log = logging.getLogger(__name__)


def run_precision(accelerator: Accelerator) -> str:
    """The resolved precision the run's Accelerator autocasts in, for the pseudo-perplexity passes."""
    return "bf16" if accelerator.mixed_precision == "bf16" else "fp32"


def warm_up_missing_head(s: Session, model, head_report: HeadReport, data: RunData, plan: MaskingPlan) -> None:
    """Main process trains the head alone; every process then takes its weights (computed once, broadcast)."""
    cfg, accelerator = s.cfg, s.accelerator
    warm = cfg.head_warmup
    if not (warm.when == "always" or (warm.when == "auto" and head_report.needs_warmup)):
        return

    def warm_up() -> None:
        if len(data.train) < 2:
            raise InputError(f"corpus_dir={cfg.corpus_dir}: {len(data.train)} training sequence, but the head "
                             "warm-up holds one out; add text or set head_warmup.when=never")
        result = warm_up_head(
            model, data.train, plan, sample_seqs=warm.sample_seqs, heldout_share=warm.heldout_share,
            max_epochs=warm.max_epochs, learning_rate=warm.learning_rate, batch_size=warm.batch_size,
            min_improvement=warm.min_improvement, seed=cfg.seed, device=accelerator.device,
            autocast=accelerator.autocast, progress=cfg.runtime.progress,
            encode_batch_size=cfg.schedule.batch_size, should_stop=lambda: s.stop.requested,
            missing=head_report.missing)
        if result is None or result.stopped or s.stop.requested:  # a restart warms up again from the start
            return
        losses = result.heldout_losses
        s.metrics.write(phase="head_warmup", steps=result.steps, epochs=len(result.train_losses),
                        first_loss=losses[0], last_loss=result.best_loss, converged=result.converged,
                        heldout_losses=losses, train_losses=result.train_losses,
                        cached_positions=result.num_train, heldout_positions=result.num_heldout,
                        seconds=result.encode_seconds + result.fit_seconds, encode_seconds=result.encode_seconds)
        if not result.converged and warm.min_improvement > 0:
            log.warning("the MLM head's held-out loss was still falling after head_warmup.max_epochs=%d (%.3f -> "
                        "%.3f): base figures may be too pessimistic; raise head_warmup.max_epochs",
                        warm.max_epochs, losses[0], result.best_loss)

    on_main(accelerator, warm_up)
    head = set(head_parameter_names(model))
    broadcast_parameters(accelerator, [p for n, p in model.named_parameters() if n in head])


def measure_base(s: Session, model, tokenizer, data: RunData) -> dict:
    """The fair "base": the original encoder with the warmed head, nothing else changed; saved as base/.
    Main process only; returns the size and sha256 of base/'s weights."""
    accelerator = s.accelerator

    def measure() -> dict:
        digest = export_checkpoint(model, tokenizer, s.out / BASE)
        loss_module = MaskedOnlyMlm(model)
        start = {f"heldout_loss_{k}": e.loss(loss_module, accelerator.device, accelerator.autocast)
                 for k, e in data.evals.items()}
        start.update(measure_pppl(model, tokenizer, data.pppl_texts, s.cfg, run_precision(accelerator)))
        s.metrics.write(phase="start", step=0, **start)
        log.info("base model: %s", format_figures(start))
        return digest

    return on_main(accelerator, measure)


def warmup_record(metrics: MetricsLog) -> dict | None:
    """Steps, epochs, held-out loss before and after, whether the head warm-up converged, its seconds (None: no
    warm-up ran)."""
    warm = [r for r in metrics.read() if r.get("phase") == "head_warmup"]
    keys = ("steps", "epochs", "first_loss", "last_loss", "converged", "seconds")
    return {k: warm[-1].get(k) for k in keys} if warm else None


def start_figures(metrics: MetricsLog) -> dict:
    """The base figures of the "start" record ({} before it is written)."""
    starts = [r for r in metrics.read() if r.get("phase") == "start"]
    return {k: v for k, v in starts[-1].items() if k.startswith(("heldout_", "pppl_"))} if starts else {}


def format_figures(record: dict) -> str:
    return ", ".join(f"{k}={v:.4g}" for k, v in record.items() if isinstance(v, float))
