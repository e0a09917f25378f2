"""Config schema of the score job."""

from __future__ import annotations

from dataclasses import dataclass, field

from adapt.config.common import EncoderConfig, RuntimeConfig, validate_encoder, validate_runtime
from adapt.errors import Problems


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
    # Score at most this many documents / tokens (0 = all), chosen with the seed.
    max_docs: int = 0
    max_tokens: int = 0
    # Masked copies per forward pass.
    batch_size: int = 64
    runtime: RuntimeConfig = field(default_factory=RuntimeConfig)


def validate(cfg: ScoreJob, p: Problems, prefix: str = "") -> None:
    k = (prefix + ".") if prefix else ""
    validate_encoder(cfg.encoder, f"{k}encoder", p)
    validate_runtime(cfg.runtime, f"{k}runtime", p)
    p.check(cfg.texts not in ("", "???"), f"{k}texts is not set; pass {k}texts=<prepared folder or file>")
    p.check(cfg.max_docs >= 0 and cfg.max_tokens >= 0, f"{k}max_docs and {k}max_tokens must be >= 0")
    p.check(cfg.batch_size >= 1, f"{k}batch_size={cfg.batch_size} must be >= 1")
