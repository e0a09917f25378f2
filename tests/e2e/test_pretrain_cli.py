"""The adapt-pretrain console script: every bad setting or input ends in one error line and exit code 2 with the
inputs unchanged; a run stopped before its end exits 75 ("stopped, resumable", EX_TEMPFAIL in sysexits.h) with
the command that continues it.

Each case calls the console script's entry point (``adapt.cli.pretrain_main``, what ``adapt-pretrain`` runs) with its
command line, in one of two worker interpreters (one per core): the ~10 s interpreter and library start-up is paid
twice, not once per case. A worker records each case's exit code, stdout and stderr.
"""

from __future__ import annotations

import hashlib
import json
import os
import shutil
import subprocess
import sys
import textwrap
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from adapt.cli import EXIT_STOPPED, EXIT_USER_ERROR
from adapt.stages.pretrain import run
from tests.conftest import build_tiny_encoder
from tests.e2e.test_pretrain import tiny_cfg, write_prepared

WORKER = textwrap.dedent("""
    # run each case of a JSON file through the console script's entry point; write code, stdout, stderr
    import contextlib, io, json, os, signal, sys
    import adapt.stages.pretrain as stage
    from adapt.cli import pretrain_main

    cases_file, results_file = sys.argv[1:3]
    cases, results = json.load(open(cases_file)), {}
    original = stage._optimizer_step
    for name, argv in cases.items():
        calls = []

        def signalled(*args, **kwargs):  # the "signal" case: SIGTERM while the third optimizer step runs
            calls.append(1)
            if len(calls) == 3:
                os.kill(os.getpid(), signal.SIGTERM)
            return original(*args, **kwargs)

        stage._optimizer_step = signalled if name == "signal" else original
        out, err = io.StringIO(), io.StringIO()
        sys.argv = ["adapt-pretrain", *argv]
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            try:
                pretrain_main()
                code = 0
            except SystemExit as exc:
                code = exc.code if isinstance(exc.code, int) else 1
        results[name] = [code, out.getvalue(), err.getvalue()]
    json.dump(results, open(results_file, "w"))
""")


def _digest(*folders: Path) -> dict[str, str]:
    return {str(p): hashlib.sha256(p.read_bytes()).hexdigest()
            for folder in folders for p in sorted(folder.rglob("*")) if p.is_file()}


def _read_only_wrapper(folder: Path) -> list[str] | None:
    """A command prefix under which ``folder`` is read-only: nothing for a normal user (its mode does it); root
    ignores modes, so for root a private mount namespace in which the folder is bind-mounted read-only (None when
    that is not allowed here)."""
    folder.mkdir()
    folder.chmod(0o555)
    if os.geteuid() != 0:
        return []
    if shutil.which("unshare") is None or subprocess.run(["unshare", "-m", "true"], capture_output=True).returncode:
        return None
    script = 'mount --bind "$0" "$0" && mount -o remount,bind,ro "$0" && exec "$@"'
    return ["unshare", "-m", "sh", "-c", script, str(folder)]


def _make_cases(root: Path, encoder: Path, corpus: Path) -> dict[str, list[str]]:
    """name -> the command line's arguments."""
    base = ["debug=tiny", f"encoder.name_or_path={encoder}", "encoder.random_init=false", "runtime.progress=false",
            "eval.pppl_max_tokens=0"]

    def args(name: str, *overrides: str, corpus_dir: Path = corpus) -> list[str]:
        return [*base, f"corpus_dir={corpus_dir}", f"out_dir={root / ('out_' + name)}", *overrides]

    loose = root / "loose_texts"
    loose.mkdir()
    (loose / "notes.txt").write_text("The tenant paid the rent.\n")
    empty = write_prepared(root / "empty_train", n_train=1)
    pq.write_table(pa.table({"id": pa.array([], pa.string()), "text": pa.array([], pa.string())}),
                   empty / "train" / "part-00000.parquet")
    not_a_checkpoint = root / "some_folder"
    not_a_checkpoint.mkdir()
    return {
        "not_prepared": args("not_prepared", corpus_dir=loose),
        "empty_train": args("empty_train", corpus_dir=empty),
        "batch_too_large": args("batch_too_large", "schedule.batch_size=500"),
        "unknown_target_modules": args("unknown_target_modules", "adapter=lora", "adapter.target_modules=[qkv]"),
        "lora_rank_too_large": args("lora_rank_too_large", "adapter=lora", "adapter.r=64"),
        "resume_not_a_checkpoint": args("resume_not_a_checkpoint", f"resume={not_a_checkpoint}"),
        "read_only_out_dir": [*base, f"corpus_dir={corpus}", f"out_dir={root / 'read_only' / 'run'}"],
        "changed_masking_rate": args("changed_masking_rate", "masking.rate=0.3"),
        "stopped": args("stopped", "schedule.stop_after_steps=2"),
        "signal": args("signal"),
    }


EXPECTED = {  # name -> (exit code, text of the one error line, or of the resume hint on stdout)
    "not_prepared": (EXIT_USER_ERROR, "no train/ folder"),
    "empty_train": (EXIT_USER_ERROR, "the train split has no text"),
    "batch_too_large": (EXIT_USER_ERROR, "schedule.batch_size=500"),
    "unknown_target_modules": (EXIT_USER_ERROR, "adapter.target_modules=['qkv']"),
    "lora_rank_too_large": (EXIT_USER_ERROR, "adapter.r=64"),
    "resume_not_a_checkpoint": (EXIT_USER_ERROR, "not a checkpoint folder"),
    "read_only_out_dir": (EXIT_USER_ERROR, "out_dir="),
    "changed_masking_rate": (EXIT_USER_ERROR, "masking.rate: checkpoint 0.15, now 0.3"),
    "stopped": (EXIT_STOPPED, "schedule.stop_after_steps=null"),
    "signal": (EXIT_STOPPED, "pretrain stopped (SIGTERM) at step 3 of 4"),
}


@pytest.fixture(scope="module")
def outcomes(tmp_path_factory):
    root = tmp_path_factory.mktemp("pretrain_cli")
    encoder = build_tiny_encoder(root / "encoder")
    corpus = write_prepared(root / "corpus")
    # a run to resume with another masking rate (in process: it only has to exist)
    cfg = tiny_cfg(root, encoder, "out_changed_masking_rate", f"corpus_dir={corpus}", "schedule.stop_after_steps=2")
    run(cfg)
    cases = _make_cases(root, encoder, corpus)
    wrapper = _read_only_wrapper(root / "read_only")  # the worker holding that case runs under it
    if wrapper is None:
        del cases["read_only_out_dir"]
    before = _digest(encoder, corpus)
    env = dict(os.environ, HF_HUB_OFFLINE="1", TOKENIZERS_PARALLELISM="false", OMP_NUM_THREADS="1")
    names = sorted(cases)
    workers = []
    for number, share in enumerate((names[0::2], names[1::2])):
        (root / f"cases-{number}.json").write_text(json.dumps({name: cases[name] for name in share}))
        prefix = wrapper if "read_only_out_dir" in share else []
        cmd = [*prefix, sys.executable, "-c", WORKER, str(root / f"cases-{number}.json"),
               str(root / f"results-{number}.json")]
        workers.append(subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env,
                                        cwd=root))
    results = {}
    for number, worker in enumerate(workers):
        _, stderr = worker.communicate(timeout=900)
        assert worker.returncode == 0, stderr[-3000:]
        results.update(json.loads((root / f"results-{number}.json").read_text()))
    return results, before, _digest(encoder, corpus)


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_each_outcome_has_its_exit_code_and_one_line(outcomes, name):
    results, before, after = outcomes
    if name not in results:
        pytest.skip("a read-only folder cannot be made here (root without mount namespaces)")
    code, stdout, stderr = results[name]
    expected_code, text = EXPECTED[name]
    assert code == expected_code, stderr[-3000:]
    assert "Traceback" not in stderr
    if expected_code == EXIT_USER_ERROR:
        lines = stderr.splitlines()
        assert len(lines) == 1 and lines[0].startswith("error: "), stderr
        assert text in lines[0], lines[0]
    else:
        assert text in stdout and "resume" in stdout, stdout[-2000:]
    assert after == before, "no input file was modified, added or removed"
