"""Console entry points: one Hydra job per stage.

The DictConfig stops here: each job converts it to its typed dataclass and calls the stage's ``run``.
Any ``UserError`` (bad config value, unusable input) becomes one line on stderr and exit code 2, and so do
composition errors (unknown key, wrong type), which are checked before Hydra starts the job.
"""

from __future__ import annotations

import logging
import os
import sys
from typing import Any, Callable

import hydra
from omegaconf import DictConfig

from adapt.config import CONF_DIR, register_schemas, to_job
from adapt.errors import UserError

EXIT_USER_ERROR = 2
_HYDRA_FLAGS_WITHOUT_CHECK = ("-m", "--multirun", "--help", "-h", "--hydra-help", "--cfg", "-c", "--info",
                              "--shell-completion", "-sc", "--run", "-r", "--resolve", "-p", "--package")


def _fail(message: str) -> None:
    print(f"error: {message}", file=sys.stderr)
    sys.exit(EXIT_USER_ERROR)


def _first_line(exc: BaseException) -> str:
    """The informative line of a Hydra/OmegaConf error (they nest the cause under a generic header)."""
    text = str(exc).strip()
    if exc.__cause__ is not None:
        text += "\n" + str(exc.__cause__).strip()
    lines = [ln.strip() for ln in text.splitlines() if ln.strip()]
    useful = [ln for ln in lines if not ln.startswith(("full_key", "object_type", "reference_type", "Config search",
                                                       "provider=", "In '"))]
    return ": ".join(useful[:2]) if useful else (lines[0] if lines else type(exc).__name__)


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


def _launch(job: str, run: Callable[[Any], dict]) -> None:
    register_schemas()
    _check_overrides(job, sys.argv[1:])

    @hydra.main(version_base="1.3", config_path=str(CONF_DIR), config_name=job)
    def _task(cfg: DictConfig) -> None:
        _quiet_libraries()
        try:
            result = run(to_job(job, cfg))
        except UserError as exc:
            logging.getLogger("adapt").debug("user error", exc_info=True)
            _fail(str(exc))
        for line in result.get("summary", []):
            print(line)

    _task()


def prepare_main() -> None:
    from adapt.corpus.prepare import run

    _launch("prepare", run)


def pretrain_main() -> None:
    from adapt.pretrain import run

    _launch("pretrain", run)


def score_main() -> None:
    from adapt.score import run

    _launch("score", run)


def compare_main() -> None:
    from adapt.compare import run

    _launch("compare", run)


def demo_main() -> None:
    from adapt.demo import run

    _launch("demo", run)
