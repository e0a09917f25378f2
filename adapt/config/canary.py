"""Config schema of the canary job: plant invented secrets in a prepared corpus, or audit a model for them."""

from __future__ import annotations

from dataclasses import dataclass, field

from adapt.config.common import (EncoderConfig, RuntimeConfig, validate_encoder, validate_out_dir_apart,
                                 validate_runtime)
from adapt.common.errors import Problems

MODES = ("plant", "audit")


@dataclass
class PlantConfig:
    # How many times each planted canary is repeated in the training split; per_repeat canaries for each count.
    repeats: list[int] = field(default_factory=lambda: [1, 4, 16])
    per_repeat: int = 2
    # Canaries made the same way but never planted: the baseline a planted canary's exposure is read against.
    controls: int = 6


@dataclass
class AuditConfig:
    # Other secrets drawn for each canary's rank; the largest exposure measurable is log2(candidates + 1).
    candidates: int = 1000
    # Masked copies per forward pass.
    batch_size: int = 64


@dataclass
class CanaryJob:
    # plant: copy corpus into out_dir with canaries added to train/ (a prepared corpus pretrain can read);
    # audit: rank every canary of planted= under encoder= and write exposure.json.
    mode: str = "???"
    # plant: the output folder of adapt-prepare to copy.
    corpus: str = ""
    # audit: the output folder of a canary job with mode=plant (its canaries.json).
    planted: str = ""
    # audit: the checkpoint to audit (a pretrain run folder means its final/).
    encoder: EncoderConfig = field(default_factory=EncoderConfig)
    out_dir: str = "runs/canary"
    seed: int = 0
    plant: PlantConfig = field(default_factory=PlantConfig)
    audit: AuditConfig = field(default_factory=AuditConfig)
    runtime: RuntimeConfig = field(default_factory=RuntimeConfig)


def validate(cfg: CanaryJob, p: Problems, prefix: str = "") -> None:
    k = (prefix + ".") if prefix else ""
    validate_encoder(cfg.encoder, f"{k}encoder", p)
    validate_runtime(cfg.runtime, f"{k}runtime", p)
    p.check(cfg.mode in MODES, f"{k}mode={cfg.mode!r} is not one of {', '.join(MODES)}; try {k}mode=plant")
    if cfg.mode == "plant":
        p.check(bool(cfg.corpus), f"{k}corpus is not set; pass {k}corpus=<output folder of adapt-prepare>")
    if cfg.mode == "audit":
        p.check(bool(cfg.planted), f"{k}planted is not set; pass {k}planted=<out_dir of adapt-canary mode=plant>")
    read = cfg.corpus if cfg.mode == "plant" else cfg.planted
    if read:  # the corpus (or the planted copy) is only read
        validate_out_dir_apart(cfg.out_dir, [read], k, p)
    p.check(bool(cfg.plant.repeats) and all(r >= 1 for r in cfg.plant.repeats),
            f"{k}plant.repeats={list(cfg.plant.repeats)} needs counts >= 1; try {k}plant.repeats='[1,4,16]'")
    p.check(cfg.plant.per_repeat >= 1, f"{k}plant.per_repeat={cfg.plant.per_repeat} must be >= 1")
    p.check(cfg.plant.controls >= 1, f"{k}plant.controls={cfg.plant.controls} must be >= 1: the audit reads the "
                                     f"planted canaries against them; try {k}plant.controls=6")
    p.check(cfg.audit.candidates >= 10, f"{k}audit.candidates={cfg.audit.candidates} must be >= 10; "
                                        f"try {k}audit.candidates=1000")
    p.check(cfg.audit.batch_size >= 1, f"{k}audit.batch_size={cfg.audit.batch_size} must be >= 1")
