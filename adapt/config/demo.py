"""Config schema of the demo job: the whole chain prepare -> pretrain -> score -> compare -> report."""

from __future__ import annotations

from dataclasses import dataclass, field

from adapt.config import compare as compare_cfg
from adapt.config import prepare as prepare_cfg
from adapt.config import pretrain as pretrain_cfg
from adapt.config import report as report_cfg
from adapt.config import score as score_cfg
from adapt.common.errors import Problems


@dataclass
class DemoJob:
    out_dir: str = "runs/demo"
    # Which invented domain of corpora_samples/ to run: legal or clinical.
    domain: str = "legal"
    prepare: prepare_cfg.PrepareJob = field(default_factory=prepare_cfg.PrepareJob)
    prepare_general: prepare_cfg.PrepareJob = field(default_factory=prepare_cfg.PrepareJob)
    pretrain: pretrain_cfg.PretrainJob = field(default_factory=pretrain_cfg.PretrainJob)
    score: score_cfg.ScoreJob = field(default_factory=score_cfg.ScoreJob)
    compare: compare_cfg.CompareJob = field(default_factory=compare_cfg.CompareJob)
    # the last stage: one page over the folders above (conf/demo.yaml wires them)
    report: report_cfg.ReportJob = field(default_factory=report_cfg.ReportJob)


def validate(cfg: DemoJob, p: Problems, prefix: str = "") -> None:
    p.check(cfg.domain in ("legal", "clinical"), f"domain={cfg.domain!r} is not one of legal, clinical")
    prepare_cfg.validate(cfg.prepare, p, "prepare")
    prepare_cfg.validate(cfg.prepare_general, p, "prepare_general")
    pretrain_cfg.validate(cfg.pretrain, p, "pretrain")
    score_cfg.validate(cfg.score, p, "score")
    compare_cfg.validate(cfg.compare, p, "compare", arms_required=False)  # the demo fills arms
    report_cfg.validate(cfg.report, p, "report")
