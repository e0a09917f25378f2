"""Console entry points: one Hydra job per stage.

The DictConfig stops here: each job converts it to its typed dataclass and calls the stage's ``run``.
Any ``UserError`` (bad config value, unusable input) becomes one line on stderr and exit code 2, and so do
composition errors (unknown key, wrong type), which are checked before Hydra starts the job. A ``-m`` sweep is
expanded the way Hydra's basic sweeper expands it and every job is composed and validated before the first starts;
each job then writes into its own folder, Hydra's job output dir ``<out_dir>/<job number>``.
"""

from __future__ import annotations

import dataclasses
import importlib
import logging
import os
import sys
from typing import Any, Callable, Iterator

# OpenMP threads that spin while waiting make torch 5-10x slower when anything else uses the CPU; set before
# torch is imported (measured on 2 cores; a user's own setting wins).
os.environ.setdefault("OMP_WAIT_POLICY", "PASSIVE")

import hydra  # noqa: E402
from hydra.core.hydra_config import HydraConfig  # noqa: E402
from hydra.types import RunMode  # noqa: E402
from omegaconf import DictConfig, OmegaConf, open_dict  # noqa: E402

from adapt.config import CONF_DIR, register_schemas, to_job  # noqa: E402
from adapt.common.errors import ConfigError, UserError  # noqa: E402
from adapt.common.io import read_json  # noqa: E402
from adapt.contracts.manifest import MANIFEST, record_launch  # noqa: E402

EXIT_USER_ERROR = 2
# A job that stopped before its end (a signal, or pretrain's schedule.stop_after_steps) and that the same command
# resumes: EX_TEMPFAIL of sysexits.h ("try again later"), distinct from success (0) and from errors (1, 2).
EXIT_STOPPED = 75
_MULTIRUN_FLAGS = ("-m", "--multirun")
_HYDRA_FLAGS_WITHOUT_CHECK = ("--help", "-h", "--hydra-help", "--cfg", "-c", "--info",
                              "--shell-completion", "-sc", "--run", "-r", "--resolve", "-p", "--package")
_BASIC_SWEEPER = "hydra._internal.core_plugins.basic_sweeper.BasicSweeper"


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


def _reason(job: str, exc: BaseException) -> str:
    if isinstance(exc, UserError):
        return str(exc)
    return f"{_first_line(exc)} (see `adapt-{job} --cfg job` for every key and its current value)"


@dataclasses.dataclass(frozen=True)
class SweepJob:
    """One job of a ``-m`` sweep, as Hydra's basic sweeper will launch it, composed and validated."""

    num: int
    overrides: list[str]  # every override of this job, as Hydra passes them
    swept: list[str]  # the overrides whose key takes several values in the sweep
    config: Any  # the job's dataclass; its out_dir is the job's own folder


def _sweep_combinations(overrides: list[str], sweeper: Any, loader: Any) -> tuple[list[list[str]], set[str]]:
    """Every job's overrides in launch order and the swept keys, expanded as the basic sweeper expands them."""
    from hydra._internal.core_plugins.basic_sweeper import BasicSweeper
    from hydra.core.override_parser.overrides_parser import OverridesParser

    arguments = [f"{k}={v}" for k, v in (sweeper.get("params") or {}).items()] + overrides
    parsed = OverridesParser.create(config_loader=loader).parse_overrides(arguments)
    for o in parsed:
        if o.is_sweep_override() and not o.is_discrete_sweep():
            key = o.get_key_element()
            raise ConfigError(f"{o.input_line}: a sweep takes a list of values, not an interval; write e.g. "
                              f"{key}=0.1,0.2 or {key}=range(1,4)")
    swept_keys = {o.get_key_element() for o in parsed if o.is_sweep_override()}
    return BasicSweeper.split_arguments(parsed, None)[0], swept_keys


def _set_job_out_dir(cfg: DictConfig, num: int) -> None:
    """Drop the hydra node and point out_dir at the folder Hydra gives job ``num`` (what run_job computes)."""
    with open_dict(cfg):
        cfg.hydra.job.id = num
        cfg.hydra.job.num = num
        out_dir = os.path.join(str(OmegaConf.select(cfg, "hydra.sweep.dir")),
                               str(OmegaConf.select(cfg, "hydra.sweep.subdir")))
        del cfg["hydra"]
    cfg.out_dir = os.path.abspath(out_dir)


def _out_dirs(config: Any, prefix: str = "") -> Iterator[tuple[str, str]]:
    """(key, absolute folder) of every out_dir in a job config, nested jobs included (the demo holds four)."""
    for f in dataclasses.fields(config):
        value = getattr(config, f.name)
        if dataclasses.is_dataclass(value):
            yield from _out_dirs(value, f"{prefix}{f.name}.")
        elif f.name == "out_dir" and value:
            yield f"{prefix}out_dir", os.path.abspath(value)


def _refuse_unwritable(config: Any) -> None:
    """Hydra writes into out_dir before the job starts: a folder that cannot be written ends here, in one line."""
    from adapt.contracts.run_folder import ensure_writable

    for key, folder in _out_dirs(config):
        ensure_writable(folder, key)


def _refuse_shared_out_dirs(jobs: list[SweepJob]) -> None:
    writer: dict[str, SweepJob] = {}
    for job in jobs:
        for key, folder in _out_dirs(job.config):
            first = writer.setdefault(folder, job)
            if first.num != job.num:
                raise ConfigError(
                    f"{key}={folder} would be written by sweep job {first.num} ({', '.join(first.swept)}) and "
                    f"job {job.num} ({', '.join(job.swept)}); leave {key} to follow out_dir (each job writes into "
                    f"out_dir/<job number>) or sweep it too")


def _refuse_other_runs(jobs: list[SweepJob]) -> None:
    """A job folder that holds a run of other settings would be resumed as if it were this job's: refuse it."""
    for job in jobs:
        manifest = os.path.join(job.config.out_dir, MANIFEST)
        if not os.path.exists(manifest):
            continue
        try:
            launch = read_json(manifest).get("launch") or {}
        except (OSError, ValueError, AttributeError):  # unreadable: it is still somebody else's folder
            launch = {}
        if launch.get("mode") != "multirun" or launch.get("swept") != job.swept:
            made_by = (f"the sweep job {', '.join(launch.get('swept') or [])}" if launch.get("mode") == "multirun"
                       else "other settings")
            raise ConfigError(
                f"sweep job {job.num} ({', '.join(job.swept)}) would write into {job.config.out_dir}, which holds "
                f"a run of {made_by} (see its {MANIFEST}); give the sweep a new out_dir, or repeat that sweep "
                "to resume it")


def plan_sweep(job: str, overrides: list[str]) -> list[SweepJob] | None:
    """Compose and validate every job of a sweep; None when a sweeper other than the basic one decides the jobs.

    Raises ``ConfigError`` naming the first bad job, so nothing starts unless every job is valid.
    """
    from hydra import compose, initialize_config_dir
    from hydra.core.global_hydra import GlobalHydra
    from hydra.core.override_parser.overrides_parser import OverridesParser

    register_schemas()
    with initialize_config_dir(version_base="1.3", config_dir=str(CONF_DIR), job_name=job):
        loader = GlobalHydra.instance().config_loader()
        parsed = OverridesParser.create(config_loader=loader).parse_overrides(overrides)
        fixed = [o.input_line for o in parsed if not o.is_sweep_override()]
        sweeper = compose(config_name=job, overrides=fixed, return_hydra_config=True).hydra.sweeper
        if sweeper.get("_target_") != _BASIC_SWEEPER:
            return None
        combinations, swept_keys = _sweep_combinations(overrides, sweeper, loader)
        if "out_dir" in swept_keys:
            raise ConfigError(f"{next(o for o in overrides if o.startswith('out_dir='))} sweeps out_dir, but in a "
                              "sweep out_dir is the sweep's folder and each job writes into out_dir/<job number>; "
                              "give one out_dir and sweep other keys")
        jobs = []
        for num, combination in enumerate(combinations):
            swept = [o for o in combination if o.split("=", 1)[0] in swept_keys]
            try:
                cfg = compose(config_name=job, overrides=combination, return_hydra_config=True)
                _set_job_out_dir(cfg, num)
                jobs.append(SweepJob(num, combination, swept, to_job(job, cfg)))
            except Exception as exc:  # a UserError or a composition error: name the job, then the problem
                raise ConfigError(f"sweep job {num} ({', '.join(swept)}): {_reason(job, exc)}") from exc
    _refuse_shared_out_dirs(jobs)
    _refuse_other_runs(jobs)
    return jobs


def _check_overrides(job: str, argv: list[str]) -> list[SweepJob] | None:
    """Compose with the given overrides (every job of a ``-m`` sweep) so bad keys and values fail with one line.

    Returns the sweep's jobs for ``-m``, else None.
    """
    if any(a.split("=")[0] in _HYDRA_FLAGS_WITHOUT_CHECK for a in argv):
        return None
    overrides = [a for a in argv if a not in _MULTIRUN_FLAGS]
    from hydra import compose, initialize_config_dir

    try:
        if len(overrides) < len(argv):
            return plan_sweep(job, overrides)
        with initialize_config_dir(version_base="1.3", config_dir=str(CONF_DIR), job_name=job):
            cfg = compose(config_name=job, overrides=overrides)
        _refuse_unwritable(to_job(job, cfg))
    except Exception as exc:  # UserError or Hydra/OmegaConf composition error: one line, no traceback
        _fail(_reason(job, exc))
    return None


def _enter_job(cfg: DictConfig, sweep: list[SweepJob] | None) -> str:
    """Point a sweep job's out_dir at its own folder and record how it was launched; returns its error prefix."""
    hydra_cfg = HydraConfig.get()
    overrides = [str(o) for o in hydra_cfg.overrides.task]
    if hydra_cfg.mode != RunMode.MULTIRUN:
        record_launch(mode="run", overrides=overrides)
        return ""
    num, out_dir = int(hydra_cfg.job.num), str(hydra_cfg.runtime.output_dir)
    planned = sweep[num] if sweep is not None and num < len(sweep) else None
    if planned is not None and (planned.overrides != overrides or planned.config.out_dir != out_dir):
        raise RuntimeError(f"sweep job {num} was checked as {planned.overrides} in {planned.config.out_dir} but "
                           f"Hydra launched {overrides} in {out_dir}")
    swept = planned.swept if planned is not None else []
    cfg.out_dir = out_dir  # nested out_dirs (the demo's) interpolate ${out_dir}, so they follow
    record_launch(mode="multirun", job_num=num, swept=swept, overrides=overrides, job_dir=out_dir)
    return f"sweep job {num} ({', '.join(swept)}): "


def _quiet_libraries() -> None:
    os.environ.setdefault("TOKENIZERS_PARALLELISM", "false")
    import transformers

    transformers.logging.set_verbosity_error()
    transformers.logging.disable_progress_bar()


def _launch(job: str, module: str) -> None:
    """Check overrides, then run ``<module>.run`` under Hydra (the stage is imported only after the check)."""
    register_schemas()
    sweep = _check_overrides(job, sys.argv[1:])
    stopped: list[str] = []  # jobs that stopped before their end (resumable)

    @hydra.main(version_base="1.3", config_path=str(CONF_DIR), config_name=job)
    def _task(cfg: DictConfig) -> None:
        _quiet_libraries()
        rank0 = os.environ.get("RANK", "0") == "0"  # under torchrun / accelerate launch only rank 0 talks
        if not rank0:
            logging.getLogger().setLevel(logging.WARNING)
        error_prefix = _enter_job(cfg, sweep)
        if error_prefix and rank0:
            print(f"{error_prefix}{cfg.out_dir}")
        run: Callable[[Any], dict] = importlib.import_module(module).run
        try:
            result = run(to_job(job, cfg))
        except UserError as exc:
            logging.getLogger("adapt").debug("user error", exc_info=True)
            _fail(error_prefix + str(exc))
        for line in result.get("summary", []) if rank0 else []:
            print(line)
        if result.get("completed") is False:
            stopped.append(str(result.get("stopped_by")))
            if result.get("stopped_by") != "schedule.stop_after_steps":
                sys.exit(EXIT_STOPPED)  # a signal: no further job of a sweep starts

    _task()
    if stopped:
        sys.exit(EXIT_STOPPED)


def prepare_main() -> None:
    _launch("prepare", "adapt.stages.prepare")


def vocab_main() -> None:
    _launch("vocab", "adapt.stages.vocab")


def pretrain_main() -> None:
    _launch("pretrain", "adapt.stages.pretrain")


def score_main() -> None:
    _launch("score", "adapt.stages.score")


def compare_main() -> None:
    _launch("compare", "adapt.stages.compare")


def report_main() -> None:
    _launch("report", "adapt.stages.report")


def canary_main() -> None:
    _launch("canary", "adapt.stages.canary")


def demo_main() -> None:
    _launch("demo", "adapt.stages.demo")
