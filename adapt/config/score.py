"""Config schema of the score job."""

from __future__ import annotations

from dataclasses import dataclass, field

from adapt.config.common import EncoderConfig, RuntimeConfig, validate_encoder, validate_runtime
from adapt.common.errors import Problems

# Scoring variants of adapt.pppl: "token" masks one token per copy (Salazar et al. 2020); "word_l2r" also masks
# the later pieces of the same word (PLL-word-l2r, Kauf & Ivanova 2023).
VARIANTS = ("token", "word_l2r")
# The splits of a prepared corpus (adapt.contracts.prepared_corpus reads them).
SPLITS = ("train", "heldout")


@dataclass
class CIConfig:
    # Two-sided confidence level of the percentile bootstrap over documents.
    confidence: float = 0.95
    # Bootstrap resamples (0 = no interval).
    bootstrap_resamples: int = 1000


@dataclass
class ScoreJob:
    # Checkpoint to score (any folder AutoModelForMaskedLM loads, or packaged:all-minilm-l6-v2).
    encoder: EncoderConfig = field(default_factory=EncoderConfig)
    # Text to score: a prepared corpus folder (its heldout/ split), a Parquet/jsonl/txt file, or a folder of them.
    texts: str = "???"
    # Which split of a prepared corpus folder to read.
    split: str = "heldout"
    out_dir: str = "runs/score"
    seed: int = 0
    # Score at most this many documents / tokens (0 = all). With either limit set, documents are taken in a
    # seeded random order; the document that crosses max_tokens is cut so the total equals the budget.
    max_docs: int = 0
    max_tokens: int = 0
    # Masked copies per forward pass.
    batch_size: int = 64
    # token or word_l2r (see VARIANTS above).
    variant: str = "token"
    # Document tokens between the starts of a long document's overlapping windows; each token is scored in the
    # window giving it the most context on its shorter side. 0 = half a window; >= the window = no overlap.
    window_stride: int = 0
    # Score a checkpoint whose MLM head was initialised at random (e.g. the packaged encoder). The figure is then
    # meaningless as a quality measure; only for speed measurements and plumbing checks.
    allow_untrained_head: bool = False
    ci: CIConfig = field(default_factory=CIConfig)
    runtime: RuntimeConfig = field(default_factory=RuntimeConfig)


def validate(cfg: ScoreJob, p: Problems, prefix: str = "") -> None:
    k = (prefix + ".") if prefix else ""
    validate_encoder(cfg.encoder, f"{k}encoder", p)
    validate_runtime(cfg.runtime, f"{k}runtime", p)
    p.check(cfg.texts not in ("", "???"), f"{k}texts is not set; pass {k}texts=<prepared folder or file>")
    p.check(cfg.split in SPLITS, f"{k}split={cfg.split!r} is not one of {', '.join(SPLITS)}; try {k}split=heldout")
    p.check(cfg.max_docs >= 0 and cfg.max_tokens >= 0, f"{k}max_docs and {k}max_tokens must be >= 0 (0 = all)")
    p.check(cfg.batch_size >= 1, f"{k}batch_size={cfg.batch_size} must be >= 1; try {k}batch_size=64")
    p.check(cfg.window_stride >= 0,
            f"{k}window_stride={cfg.window_stride} must be >= 0 (0 = half a window); try {k}window_stride=0")
    p.check(cfg.variant in VARIANTS,
            f"{k}variant={cfg.variant!r} is not one of {', '.join(VARIANTS)}; try {k}variant=token")
    p.check(0.0 < cfg.ci.confidence < 1.0,
            f"{k}ci.confidence={cfg.ci.confidence} is outside (0, 1); try {k}ci.confidence=0.95")
    p.check(cfg.ci.bootstrap_resamples >= 0, f"{k}ci.bootstrap_resamples={cfg.ci.bootstrap_resamples} is negative; "
            f"try {k}ci.bootstrap_resamples=1000 (0 = no interval)")
