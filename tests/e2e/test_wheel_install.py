"""A regular (non-editable) wheel of the project installs, and its console scripts run the chain outside the checkout.

The wheel is built offline (no build isolation) from a copy of the sources, installed with ``--no-deps`` into a
fresh virtualenv, and that virtualenv reaches the test venv's dependencies through a ``.pth`` file naming the test
venv's site-packages folder. A folder named in a ``.pth`` file is added to ``sys.path`` but its own ``.pth`` files
are not run (Python's ``site`` module docs), so the editable install's ``__editable__*.pth`` stays inactive and
``import adapt`` can only come from the wheel. The configs must come from the wheel too (``adapt.conf``).
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
import sysconfig
import zipfile
from pathlib import Path

import pytest

pytestmark = pytest.mark.slow

ROOT = Path(__file__).resolve().parents[2]
SAMPLES = ROOT / "corpora_samples"
LEGAL_SUBSET = ("judgment.jsonl", "tenancy_notice.jsonl", "contract_clauses.jsonl")
SCRIPTS = ("adapt-prepare", "adapt-vocab", "adapt-pretrain", "adapt-score", "adapt-compare", "adapt-report",
           "adapt-canary", "adapt-demo")


def _run(cmd: list[str], **kwargs) -> subprocess.CompletedProcess:
    proc = subprocess.run([str(c) for c in cmd], capture_output=True, text=True, timeout=600, **kwargs)
    assert proc.returncode == 0, f"{cmd[0]} {cmd[1:3]} exited {proc.returncode}:\n{proc.stderr[-3000:]}"
    return proc


def _build_wheel(root: Path) -> Path:
    """Build from a copy, so the build writes nothing (build/, *.egg-info) into the checkout."""
    src = root / "src"
    src.mkdir()
    ignore = shutil.ignore_patterns("__pycache__", "*.pyc")
    for name in ("pyproject.toml", "README.md"):
        shutil.copy2(ROOT / name, src / name)
    for name in ("adapt", "conf"):
        shutil.copytree(ROOT / name, src / name, ignore=ignore)
    _run([sys.executable, "-m", "pip", "wheel", "--no-deps", "--no-build-isolation", "--no-index", "-q",
          "-w", root / "dist", src])
    (wheel,) = (root / "dist").glob("adapt-*.whl")
    return wheel


def _make_venv(root: Path, wheel: Path) -> Path:
    venv = root / "venv"
    _run([sys.executable, "-m", "venv", "--without-pip", venv])
    python = venv / "bin" / "python"
    # pip from the test venv, run for the new interpreter; the .pth is written afterwards, so this pip sees an
    # empty environment and cannot touch the test venv
    _run([sys.executable, "-m", "pip", "--python", python, "install", "--no-deps", "--no-index", "-q", wheel])
    purelib = _run([python, "-c", "import sysconfig; print(sysconfig.get_paths()['purelib'])"]).stdout.strip()
    ours = {sysconfig.get_paths()["purelib"], sysconfig.get_paths()["platlib"]}
    (Path(purelib) / "test_venv_dependencies.pth").write_text("\n".join(sorted(ours)) + "\n")
    return venv


@pytest.fixture(scope="module")
def installed(tmp_path_factory) -> dict:
    root = tmp_path_factory.mktemp("wheel")
    wheel = _build_wheel(root)
    venv = _make_venv(root, wheel)
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "PYTHONHOME", "VIRTUAL_ENV")}
    env.update(HF_HUB_OFFLINE="1", TOKENIZERS_PARALLELISM="false", ADAPT_SAMPLES_DIR=str(SAMPLES),
               PATH=f"{venv / 'bin'}{os.pathsep}{env.get('PATH', '')}")
    work = root / "work"  # outside the checkout: nothing can be found relative to the current folder
    work.mkdir()
    return {"wheel": wheel, "venv": venv, "env": env, "work": work}


def test_wheel_holds_every_module_and_config_file(installed):
    names = set(zipfile.ZipFile(installed["wheel"]).namelist())
    expected = {"/".join(p.relative_to(ROOT).parts) for p in (ROOT / "adapt").rglob("*.py")
                if "__pycache__" not in p.parts}
    expected |= {"adapt/" + "/".join(p.relative_to(ROOT).parts) for p in (ROOT / "conf").rglob("*")
                 if p.suffix in (".yaml", ".py") and "__pycache__" not in p.parts}
    assert any(n.startswith("adapt/conf/prepare/debug/") for n in expected)  # the scan itself found the configs
    assert not expected - names, f"missing from the wheel: {sorted(expected - names)[:10]}"


def test_import_comes_from_the_wheel_not_the_checkout(installed):
    venv = installed["venv"]
    code = ("import json, adapt, adapt.conf, adapt.config, torch; "
            "print(json.dumps([adapt.__file__, list(adapt.conf.__path__), str(adapt.config.CONF_DIR)]))")
    out = _run([venv / "bin" / "python", "-c", code], env=installed["env"], cwd=installed["work"]).stdout
    files = json.loads(out.splitlines()[-1])
    where = [Path(files[0]), *map(Path, files[1]), Path(files[2])]
    assert all(p.resolve().is_relative_to(venv.resolve()) for p in where), where
    for script in SCRIPTS:
        assert (venv / "bin" / script).is_file(), script


def test_console_scripts_run_the_chain_and_the_demo(installed, tmp_path):
    """prepare -> pretrain -> score -> compare -> report on real outputs, with the demo running meanwhile."""
    bin_dir, env, work = installed["venv"] / "bin", installed["env"], installed["work"]
    raw = tmp_path / "legal"  # a subset of the invented legal samples, to keep the runs short
    raw.mkdir()
    for name in LEGAL_SUBSET:
        shutil.copy2(SAMPLES / "legal" / name, raw / name)
    # the demo reads the general samples, the quality gold set and the task through ADAPT_SAMPLES_DIR
    demo = subprocess.Popen([str(bin_dir / "adapt-demo"), "debug=tiny", f"out_dir={tmp_path / 'demo'}",
                             f"prepare.inputs=[{raw}]", "compare.seeds=[0]"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env, cwd=work)
    try:
        _run_chain(bin_dir, env, work, raw, tmp_path / "out")
    except BaseException:
        demo.kill()
        raise
    finally:
        _, demo_err = demo.communicate(timeout=600)
    assert demo.returncode == 0, f"adapt-demo exited {demo.returncode}:\n{demo_err[-3000:]}"
    assert (tmp_path / "demo" / "demo.json").is_file()
    assert (tmp_path / "demo" / "compare" / "comparison.json").is_file()
    assert not list(work.iterdir())  # every output went where its out_dir said, none into the working folder


def _run_chain(bin_dir: Path, env: dict, work: Path, raw: Path, out: Path) -> None:
    def run(script: str, *overrides: str) -> None:
        _run([bin_dir / script, "debug=tiny", *overrides], env=env, cwd=work)

    run("adapt-prepare", f"inputs=[{raw}]", f"out_dir={out / 'prepared'}")
    assert (out / "prepared" / "profile.json").is_file() and list((out / "prepared" / "train").glob("*.parquet"))
    run("adapt-pretrain", f"corpus_dir={out / 'prepared'}", f"out_dir={out / 'run'}")
    assert (out / "run" / "final" / "model.safetensors").is_file()
    run("adapt-score", f"texts={out / 'prepared'}", f"out_dir={out / 'score'}",
        f"encoder.name_or_path={out / 'run' / 'final'}", "encoder.random_init=false")
    assert json.loads((out / "score" / "scores.json").read_text())["pseudo_perplexity"] > 1.0  # exp(-ΣPLL/N) > 1 (Salazar et al. 2020)
    run("adapt-compare", f"task.dir={SAMPLES / 'tasks' / 'legal'}", f"+arms.base={out / 'run' / 'base'}",
        f"+arms.final={out / 'run' / 'final'}", "seeds=[0]", f"out_dir={out / 'compare'}")
    comparison = json.loads((out / "compare" / "comparison.json").read_text())
    assert {"base", "final"} <= set(comparison["arms"]) and comparison["verdict"]
    run("adapt-report", f"prepared_dir={out / 'prepared'}", f"pretrain_dir={out / 'run'}",
        f"score_dirs=[{out / 'score'}]", f"compare_dir={out / 'compare'}", f"out_dir={out / 'report'}")
    assert (out / "report" / "report.html").is_file()
