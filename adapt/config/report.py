"""Config schema of the report job: which output folders to read, and where the report goes."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Optional

from adapt.config.common import optional_str
from adapt.common.errors import Problems

# the folder keys, in the order the report reads them; every one is optional
FOLDER_KEYS = ("prepared_dir", "general_dir", "vocab_dir", "pretrain_dir", "canary_dir", "score_dirs",
              "compare_dir")


@dataclass
class PairedCIConfig:
    # Two-sided confidence level of the paired bootstrap interval of the pseudo-perplexity ratio (adapted / base).
    confidence: float = 0.95
    # Bootstrap resamples over the documents both checkpoints scored (0 = no interval).
    bootstrap_resamples: int = 2000
    # Seed of the resampling.
    seed: int = 0


@dataclass
class ReportJob:
    # Output folder of adapt-prepare on the domain corpus (its profile.json).
    prepared_dir: Optional[str] = None
    # Output folder of adapt-prepare on general text (fertility and overlap are compared with it).
    general_dir: Optional[str] = None
    # Output folder of adapt-vocab (vocab_report.json): the words added to the encoder's vocabulary.
    vocab_dir: Optional[str] = None
    # Run folder of adapt-pretrain (metrics.jsonl, result.json).
    pretrain_dir: Optional[str] = None
    # Output folder of adapt-canary mode=audit (exposure.json): the memorisation audit.
    canary_dir: Optional[str] = None
    # Output folders of adapt-score; an entry may also be a folder whose sub-folders are score folders.
    score_dirs: list[str] = field(default_factory=list)
    # Output folder of adapt-compare (comparison.json, predictions.jsonl).
    compare_dir: Optional[str] = None
    # Where report.html, report.md, report.json, plots/ and manifest.json go.
    out_dir: str = "runs/report"
    # Heading of the report; empty = "Domain adaptation report".
    title: str = ""
    paired_ci: PairedCIConfig = field(default_factory=PairedCIConfig)


def validate(cfg: ReportJob, p: Problems, prefix: str = "") -> None:
    k = (prefix + ".") if prefix else ""
    given = [optional_str(getattr(cfg, key)) for key in FOLDER_KEYS if key != "score_dirs"] + list(cfg.score_dirs)
    p.check(any(given), f"{k}nothing to report: set at least one of {', '.join(k + f for f in FOLDER_KEYS)}, "
                        f"e.g. {k}compare_dir=runs/compare")
    p.check(bool(optional_str(cfg.out_dir)), f"{k}out_dir is empty; try {k}out_dir=runs/report")
    if optional_str(cfg.out_dir):
        out = Path(cfg.out_dir).resolve()
        for key in FOLDER_KEYS:
            values = getattr(cfg, key) if key == "score_dirs" else [getattr(cfg, key)]
            for value in values:
                if optional_str(value) and Path(value).resolve() == out:
                    p.add(f"{k}out_dir={cfg.out_dir} is the folder given as {k}{key}; the report never writes "
                          f"into the folders it reads: choose another out_dir, e.g. {k}out_dir={out.parent}/report")
    p.check(0.0 < cfg.paired_ci.confidence < 1.0,
            f"{k}paired_ci.confidence={cfg.paired_ci.confidence} is outside (0, 1); try {k}paired_ci.confidence=0.95")
    p.check(cfg.paired_ci.bootstrap_resamples >= 0,
            f"{k}paired_ci.bootstrap_resamples={cfg.paired_ci.bootstrap_resamples} is negative; "
            f"try {k}paired_ci.bootstrap_resamples=2000 (0 = no interval)")
