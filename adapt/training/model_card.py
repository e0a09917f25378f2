"""The model card (README.md) of base/, final/ and best/: Hugging Face front-matter (YAML metadata read by the
hub and by tools such as huggingface_hub.ModelCard) and what a reader needs to judge the model. Every figure comes
from the run's result (the same numbers as result.json)."""

from __future__ import annotations

import json
import re
from pathlib import Path

from adapt.common.cautions import DATA_CAUTION, NOT_ADVICE
from adapt.common.io import atomic_write_text
from adapt.config.pretrain import PretrainJob

HUB_ID = re.compile(r"^[A-Za-z0-9][\w.-]*/[\w.-]+$")  # owner/name, as the hub spells model ids
WHAT = {"base": "the starting encoder with its MLM head warmed up (encoder frozen): the fair baseline",
        "final": "the encoder after continued pretraining, at the run's last step",
        "best": "the encoder at the step with the lowest domain held-out loss"}


def _front_matter(cfg: PretrainJob, which: str) -> str:
    """YAML front-matter; strings written as JSON strings, which YAML reads as the same strings."""
    meta = {"library_name": "transformers", "pipeline_tag": "fill-mask",
            "license": cfg.card.license or "unknown",
            "tags": ["fill-mask", "domain-adaptation", "continued-pretraining", f"adapt-{which}"]}
    name = cfg.encoder.name_or_path
    if HUB_ID.match(name) and not Path(name).exists():
        meta["base_model"] = name
    lines = ["---"]
    for key, value in meta.items():
        if isinstance(value, list):
            lines += [f"{key}:"] + [f"- {json.dumps(v)}" for v in value]
        else:
            lines.append(f"{key}: {json.dumps(value)}")
    return "\n".join(lines + ["---", ""])


def _figures(result: dict, which: str) -> list[str]:
    start = result["start"]
    if which == "base":
        after, label = {}, None
    elif which == "best":
        after, label = result["best"]["heldout"], f"best (step {result['best']['step']})"
    else:
        after, label = result["end"], f"final (step {result['step']})"
    keys = sorted(k for k in set(start) | set(after) if not k.endswith(("_ci_low", "_ci_high")))
    head = ["| measure | base |" + (f" {label} |" if label else ""), "|---|---|" + ("---|" if label else "")]

    def fmt(d: dict, k: str) -> str:  # pseudo-perplexity with its 95% bootstrap interval over documents
        band = f" ({d[k + '_ci_low']:.4g}–{d[k + '_ci_high']:.4g})" if k + "_ci_low" in d else ""
        return f"{d[k]:.4g}{band}" if k in d else "not measured"

    return head + [f"| {k} | {fmt(start, k)} |" + (f" {fmt(after, k)} |" if label else "") for k in keys]


def _attention_dropout_line(result: dict) -> str:
    d = result["attention_dropout"]
    if d.get("training") is None:
        return "attention-probability dropout: not a setting of this architecture's config"
    if d["training"] == d["exported"]:
        return f"attention-probability dropout: {d['training']} (the starting encoder's own)"
    return (f"attention-probability dropout: {d['training']} in training (encoder.attention_dropout); config.json "
            f"keeps the starting encoder's {d['exported']}, so fine-tuning uses the same dropout as for the base")


def write_model_card(folder: Path, cfg: PretrainJob, result: dict, which: str) -> None:
    """README.md of ``folder``, ``which`` one of base, final, best."""
    warm = result.get("head_warmup")
    warm_line = ("no head warm-up ran (the starting checkpoint has a complete MLM head)" if warm is None else
                 f"head warm-up on cached encoder states: {warm.get('epochs')} epochs, held-out loss "
                 f"{warm['first_loss']:.4g} -> {warm['last_loss']:.4g}, "
                 f"{'converged' if warm['converged'] else 'still improving when it stopped'}")
    best = result.get("best")
    licence = (f"`{cfg.card.license}`, as given by the person who trained it (card.license)" if cfg.card.license
               else "not given (card.license=null): set it, respecting the licences of the starting encoder and "
                    "of the corpus, before sharing")
    trained = "" if which == "base" else f"""
- training variant: {cfg.adapter.kind} ({result['trainable_parameters']:,} of {result['total_parameters']:,} parameters trained)
- optimizer steps: {result['step']} of schedule.max_steps={cfg.schedule.max_steps}{' (stopped early)' if result.get('stopped_by') == 'early_stop' else ''}; tokens seen: {result['tokens_seen']:,}
- effective batch: {result['effective_batch_size']} sequences (batch {cfg.schedule.batch_size} × accumulation {cfg.schedule.grad_accum_steps} × {result['num_processes']} process(es)) of up to {cfg.encoder.max_seq_len} tokens
- precision: {result['precision']}; seed {cfg.seed}
- {_attention_dropout_line(result)}
- masking: rate {cfg.masking.rate}, mask {cfg.masking.mask_share} / random {cfg.masking.random_share} / keep the rest, unit {cfg.masking.unit}
- data order: {cfg.data.order}; general-text replay share: {cfg.replay.share}
- learning rate {cfg.schedule.learning_rate}, warmup {cfg.schedule.warmup_steps} steps, {cfg.schedule.decay} decay
- best step (lowest domain held-out loss): {best['step'] if best else 'not tracked (early_stop.patience and checkpoint.keep_best off)'}"""
    card = f"""{_front_matter(cfg, which)}
# Domain-adapted encoder ({which}/)

This folder holds {WHAT[which]}. Starting encoder: `{cfg.encoder.name_or_path}`; prepared corpus:
`{cfg.corpus_dir}`; general text: `{cfg.general_dir or 'none'}`. Made with adapt (masked-language-model
continued pretraining).
{trained}
- {warm_line}
- weights licence: {licence}

## Held-out figures

Base = starting encoder with warmed-up head. heldout_loss_* is the MLM loss on a fixed mask of held-out text
(domain = the prepared corpus, general = general_dir); pppl_* is pseudo-perplexity, comparable only between models
sharing this tokenizer.

{chr(10).join(_figures(result, which))}

## Intended use

A starting point for fine-tuning on tasks in the corpus's domain (classification, tagging, retrieval), or for
fill-mask queries on such text. Compare it with the base encoder on your own labelled task before relying on it
(adapt-compare).

## Limits

Trained on one corpus: it knows no more than that text holds, may have forgotten some general
language (see the general figures), inherits the starting encoder's biases and may reproduce rare strings of the
training text. Held-out losses are measured on a bounded sample.

## Cautions for clinical and legal text

{DATA_CAUTION} {NOT_ADVICE} Defer to local law, data-protection rules and your institution's governance.
"""
    atomic_write_text(folder / "README.md", card)
