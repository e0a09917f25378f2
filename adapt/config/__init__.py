"""Typed config schemas, registered with Hydra's ConfigStore, and their validation.

The DictConfig stops at the CLI: ``to_job`` turns it into the job's dataclass and validates every value,
raising one ``ConfigError`` that lists all problems. Library code only ever sees dataclasses.
"""

from __future__ import annotations

import importlib.util
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable

from hydra.core.config_store import ConfigStore
from omegaconf import DictConfig, OmegaConf

from adapt.config import canary, compare, demo, prepare, pretrain, report, score, vocab
from adapt.common.errors import ConfigError, Problems



def _conf_dir() -> Path:
    """The conf/ folder: top of the checkout in an editable install, ``adapt/conf`` inside a wheel."""
    spec = importlib.util.find_spec("adapt.conf")
    if spec is None or not spec.submodule_search_locations:
        raise RuntimeError("the package adapt.conf (the Hydra configs) is missing from this installation; "
                           "reinstall the tool")
    return Path(list(spec.submodule_search_locations)[0])


CONF_DIR = _conf_dir()


@dataclass(frozen=True)
class JobSpec:
    name: str
    schema: type
    validate: Callable[[Any, Problems], None]


JOBS: dict[str, JobSpec] = {
    "prepare": JobSpec("prepare", prepare.PrepareJob, prepare.validate),
    "vocab": JobSpec("vocab", vocab.VocabJob, vocab.validate),
    "pretrain": JobSpec("pretrain", pretrain.PretrainJob, pretrain.validate),
    "score": JobSpec("score", score.ScoreJob, score.validate),
    "compare": JobSpec("compare", compare.CompareJob, compare.validate),
    "report": JobSpec("report", report.ReportJob, report.validate),
    "canary": JobSpec("canary", canary.CanaryJob, canary.validate),
    "demo": JobSpec("demo", demo.DemoJob, demo.validate),
}


def samples_dir() -> str:
    """Folder of the invented sample corpora: $ADAPT_SAMPLES_DIR, else corpora_samples/ beside the package."""
    env = os.environ.get("ADAPT_SAMPLES_DIR")
    return env if env else str(Path(__file__).resolve().parents[2] / "corpora_samples")


def register_schemas() -> None:
    if not OmegaConf.has_resolver("samples_dir"):
        OmegaConf.register_new_resolver("samples_dir", samples_dir)
    cs = ConfigStore.instance()
    for spec in JOBS.values():
        cs.store(name=f"{spec.name}_schema", node=spec.schema)


def to_job(job: str, cfg: DictConfig | dict) -> Any:
    """Resolve, convert to the job's dataclass and validate; raises ConfigError listing every problem."""
    spec = JOBS[job]
    if not isinstance(cfg, DictConfig):
        cfg = OmegaConf.structured(spec.schema(**cfg)) if cfg else OmegaConf.structured(spec.schema)
    container = OmegaConf.to_container(cfg, resolve=True)
    container.pop("hydra", None)
    structured = OmegaConf.merge(OmegaConf.structured(spec.schema), container)
    missing = sorted(OmegaConf.missing_keys(structured))
    if missing:  # keys without a default ("???"): name them all, rather than OmegaConf's first one
        raise ConfigError("; ".join(f"{key} is not set and has no default; pass {key}=<value>" for key in missing))
    obj = OmegaConf.to_object(structured)
    problems = Problems()
    spec.validate(obj, problems)
    problems.raise_if_any()
    return obj


def compose_job(job: str, overrides: list[str] | None = None) -> Any:
    """Compose a job's config from the packaged YAML files without running Hydra's app (for tests and tools)."""
    from hydra import compose, initialize_config_dir

    register_schemas()
    with initialize_config_dir(version_base="1.3", config_dir=str(CONF_DIR), job_name=job):
        cfg = compose(config_name=job, overrides=list(overrides or []))
    return to_job(job, cfg)
