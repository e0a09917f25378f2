"""Console entry points: one Hydra job per stage.

The DictConfig stops here: each job converts it to its typed dataclass and calls the stage's ``run``.
Any ``UserError`` (bad config value, unusable input) becomes one line on stderr and exit code 2, and so do
composition errors (unknown key, wrong type), which are checked before Hydra starts the job.
"""

from __future__ import annotations

import importlib
import logging
import os
import sys
from typing import Any, Callable

# OpenMP threads that spin while waiting make torch 5-10x slower when anything else uses the CPU; set before
# torch is imported (measured on 2 cores; a user's own setting wins).
os.environ.setdefault("OMP_WAIT_POLICY", "PASSIVE")

import hydra  # noqa: E402
from omegaconf import DictConfig  # noqa: E402

from adapt.config import CONF_DIR, register_schemas, to_job
from adapt.common.errors import UserError  # noqa: E402

EXIT_USER_ERROR = 2
_HYDRA_FLAGS_WITHOUT_CHECK = ("-m", "--multirun", "--help", "-h", "--hydra-help", "--cfg", "-c", "--info",
                              "--shell-completion", "-sc", "--run", "-r", "--resolve", "-p", "--package")


def _fail(message: str) -> None:
    print(f"error: {message}", file=sys.stderr)
    sys.exit(EXIT_USER_ERROR)


def _first_line(exc: BaseException) -> str:
    """One readable line from a Hydra/OmegaConf error (they nest the real cause under a generic header)."""
    cause = exc.__cause__
    if cause is not None and "not in" in str(cause):  # unknown key: the cause names key and schema
        return str(cause).splitlines()[0].strip()
    lines = [ln.strip() for ln in (str(exc) + "\n" + str(cause or "")).splitlines() if ln.strip()]
    keep = []
    for ln in lines:
        if ln.startswith(("full_key", "object_type", "reference_type", "Config search", "provider=", "None",
                          "To append")):
            continue
        keep.append(ln[len("In '"):].split("': ", 1)[-1] if ln.startswith("In '") else ln)
    if any(ln.startswith("Available options") for ln in keep):  # unknown group option: list the choices
        i = next(i for i, ln in enumerate(keep) if ln.startswith("Available options"))
        return f"{keep[0]}; available: {', '.join(keep[i + 1:])}"
    return ": ".join(k.rstrip(".") for k in keep[:2]) if keep else type(exc).__name__


def _check_overrides(job: str, argv: list[str]) -> None:
    """Compose once with the given overrides so that bad keys and values fail with one line, exit 2."""
    if any(a.split("=")[0] in _HYDRA_FLAGS_WITHOUT_CHECK for a in argv):
        return
    from hydra import compose, initialize_config_dir

    try:
        with initialize_config_dir(version_base="1.3", config_dir=str(CONF_DIR), job_name=job):
            cfg = compose(config_name=job, overrides=argv)
        to_job(job, cfg)
    except UserError as exc:
        _fail(str(exc))
    except Exception as exc:  # Hydra/OmegaConf composition errors: report, do not dump a traceback
        _fail(f"{_first_line(exc)} (see `adapt-{job} --cfg job` for every key and its current value)")


def _quiet_libraries() -> None:
    os.environ.setdefault("TOKENIZERS_PARALLELISM", "false")
    import transformers

    transformers.logging.set_verbosity_error()
    transformers.logging.disable_progress_bar()


def _launch(job: str, module: str) -> None:
    """Check overrides, then run ``<module>.run`` under Hydra (the stage is imported only after the check)."""
    register_schemas()
    _check_overrides(job, sys.argv[1:])

    @hydra.main(version_base="1.3", config_path=str(CONF_DIR), config_name=job)
    def _task(cfg: DictConfig) -> None:
        _quiet_libraries()
        rank0 = os.environ.get("RANK", "0") == "0"  # under torchrun / accelerate launch only rank 0 talks
        if not rank0:
            logging.getLogger().setLevel(logging.WARNING)
        run: Callable[[Any], dict] = importlib.import_module(module).run
        try:
            result = run(to_job(job, cfg))
        except UserError as exc:
            logging.getLogger("adapt").debug("user error", exc_info=True)
            _fail(str(exc))
        for line in result.get("summary", []) if rank0 else []:
            print(line)

    _task()


def prepare_main() -> None:
    _launch("prepare", "adapt.stages.prepare")


def pretrain_main() -> None:
    _launch("pretrain", "adapt.stages.pretrain")


def score_main() -> None:
    _launch("score", "adapt.stages.score")


def compare_main() -> None:
    _launch("compare", "adapt.stages.compare")


def demo_main() -> None:
    _launch("demo", "adapt.stages.demo")
