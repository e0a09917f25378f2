"""StopSignal: SIGTERM/SIGINT become a flag; a repeated SIGTERM (launchers such as torchrun forward the signal the
process group already received) does not kill the process before it has saved; a second Ctrl-C stops at once.

Each case runs in a child interpreter, so that a signal that is not handled ends the child, not the test run."""

from __future__ import annotations

import subprocess
import sys
import textwrap

import pytest

PROGRAM = textwrap.dedent("""
    import os, signal, sys, time
    from adapt.training.stop_signal import StopSignal

    with StopSignal() as stop:
        for name in sys.argv[1:]:
            os.kill(os.getpid(), getattr(signal, name))
            time.sleep(0.05)  # let the handler run
            if name == "SIGINT" and len(sys.argv) > 2:
                time.sleep(1.1)  # a person pressing Ctrl-C again, not one signal delivered twice
        print("requested" if stop.requested else "not requested", stop.signal_name)
    print("handlers restored:", signal.getsignal(signal.SIGTERM) is signal.SIG_DFL)
""")


def _run(*signals: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-c", PROGRAM, *signals], capture_output=True, text=True, timeout=60)


@pytest.mark.parametrize("signals", [("SIGTERM",), ("SIGINT",), ("SIGTERM", "SIGTERM", "SIGTERM")])
def test_signals_become_a_flag(signals):
    proc = _run(*signals)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.splitlines() == [f"requested {signals[0]}", "handlers restored: True"]


def test_a_second_ctrl_c_stops_at_once():
    proc = _run("SIGINT", "SIGINT")
    assert proc.returncode != 0 and "KeyboardInterrupt" in proc.stderr
    assert "requested" not in proc.stdout
