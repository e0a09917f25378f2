"""Config schema of the compare job."""

from __future__ import annotations

from dataclasses import dataclass, field

from adapt.config.common import RuntimeConfig, validate_runtime
from adapt.errors import Problems


@dataclass
class TaskConfig:
    # Folder with train/dev/test files (.jsonl or .csv) holding a text and a label column.
    dir: str = "???"
    text_field: str = "text"
    label_field: str = "label"
    max_seq_len: int = 64


@dataclass
class FinetuneConfig:
    learning_rate: float = 5e-5
    epochs: int = 4
    batch_size: int = 16
    weight_decay: float = 0.01
    warmup_share: float = 0.1


@dataclass
class CompareJob:
    # Arm name -> checkpoint folder (or packaged:all-minilm-l6-v2). Every arm gets the same classifier head
    # initialisation and the same seeds.
    arms: dict[str, str] = field(default_factory=dict)
    task: TaskConfig = field(default_factory=TaskConfig)
    finetune: FinetuneConfig = field(default_factory=FinetuneConfig)
    seeds: list[int] = field(default_factory=lambda: [0, 1, 2])
    # Add a TF-IDF + logistic-regression arm.
    tfidf_baseline: bool = True
    out_dir: str = "runs/compare"
    runtime: RuntimeConfig = field(default_factory=RuntimeConfig)


def validate(cfg: CompareJob, p: Problems, prefix: str = "", arms_required: bool = True) -> None:
    k = (prefix + ".") if prefix else ""
    validate_runtime(cfg.runtime, f"{k}runtime", p)
    p.check(len(cfg.arms) >= 1 or not arms_required, f"{k}arms is empty; pass e.g. '+{k}arms.base=<folder>' '+{k}arms.adapted=<folder>'")
    p.check(cfg.task.dir not in ("", "???"), f"{k}task.dir is not set; pass {k}task.dir=<folder with train/dev/test>")
    p.check(len(cfg.seeds) >= 1 and len(set(cfg.seeds)) == len(cfg.seeds),
            f"{k}seeds={list(cfg.seeds)} must be a non-empty list of distinct integers; try {k}seeds=[0,1,2]")
    f = cfg.finetune
    p.check(f.learning_rate > 0 and f.epochs >= 1 and f.batch_size >= 1 and 0 <= f.warmup_share < 1,
            f"{k}finetune needs learning_rate > 0, epochs >= 1, batch_size >= 1, 0 <= warmup_share < 1")
    p.check(8 <= cfg.task.max_seq_len <= 8192, f"{k}task.max_seq_len={cfg.task.max_seq_len} is outside [8, 8192]")
