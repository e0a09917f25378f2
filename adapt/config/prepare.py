"""Config schema of the prepare job."""

from __future__ import annotations

from dataclasses import dataclass, field

from adapt.errors import Problems


@dataclass
class PrepareJob:
    # Files or folders of documents (.txt = one document per file, .jsonl = one JSON object per line).
    inputs: list[str] = field(default_factory=list)
    out_dir: str = "runs/prepared"
    seed: int = 0
    # Field names in jsonl records.
    text_field: str = "text"
    id_field: str = "id"
    # Share of documents held out for evaluation (split by document).
    heldout_share: float = 0.1
    # Documents shorter than this (characters, after cleaning) are dropped.
    min_chars: int = 1


def validate(cfg: PrepareJob, p: Problems, prefix: str = "") -> None:
    k = (prefix + ".") if prefix else ""
    p.check(len(cfg.inputs) > 0, f"{k}inputs is empty; pass {k}inputs=[path/to/folder]")
    p.check(0.0 < cfg.heldout_share < 1.0,
            f"{k}heldout_share={cfg.heldout_share} is outside (0, 1); try {k}heldout_share=0.1")
    p.check(cfg.min_chars >= 1, f"{k}min_chars={cfg.min_chars} must be >= 1")
