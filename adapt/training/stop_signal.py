"""SIGINT/SIGTERM as a flag the pretrain stage checks at its safe points, so that it saves and exits cleanly; and
the agreement of several processes on that flag, so that every rank stops at the same step.

A signal never interrupts a phase: tokenising, warm-up, measurements, a training step and exports finish (or stop at
their next step), then the stage saves what a restart needs and exits with the "stopped, resumable" code.
"""

from __future__ import annotations

import logging
import signal
import time
from typing import Any

log = logging.getLogger(__name__)

# The same signal twice within this many seconds is one event delivered twice: torchrun and other launchers
# forward to their workers the SIGINT/SIGTERM that the whole process group has already received.
REPEAT_WINDOW_SECONDS = 1.0


class StopSignal:
    """Turns SIGINT/SIGTERM into ``requested`` (and ``signal_name``) while the ``with`` block runs.

    A repeated SIGTERM is ignored (a scheduler sends SIGKILL when its grace period ends); a second Ctrl-C, more
    than ``REPEAT_WINDOW_SECONDS`` after the first, stops at once with KeyboardInterrupt.
    """

    def __init__(self) -> None:
        self.requested = False
        self.signal_name: str | None = None
        self._first_at = 0.0
        self._previous: dict[int, Any] = {}

    def _handle(self, signum, frame) -> None:
        name = signal.Signals(signum).name
        if not self.requested:
            self.requested, self.signal_name, self._first_at = True, name, time.monotonic()
            log.warning("%s received: stopping at the next safe point and saving what a restart needs "
                        "(press Ctrl-C again to stop at once)", name)
            return
        if signum == signal.SIGINT and time.monotonic() - self._first_at > REPEAT_WINDOW_SECONDS:
            raise KeyboardInterrupt
        log.info("%s received again: already stopping", name)

    def __enter__(self) -> "StopSignal":
        try:
            for sig in (signal.SIGINT, signal.SIGTERM):
                self._previous[sig] = signal.signal(sig, self._handle)
        except ValueError:  # not the main thread: leave signals alone
            self._previous.clear()
        return self

    def __exit__(self, *exc) -> None:
        for sig, handler in self._previous.items():
            signal.signal(sig, handler)


def agreed_stop(requested: bool, accelerator, *values: float) -> tuple[bool, list[float]]:
    """Whether any process asked to stop, and the mean of ``values`` over processes, in one all-reduce.

    Every rank must call it at the same point (it is a collective with several processes); the result is the
    same on every rank, so all of them stop after the same step."""
    if accelerator.num_processes == 1:
        return requested, list(values)
    import torch  # here, so that the signal handling imports nothing heavy

    # sync point: (1 + len(values),) float64 summed over processes
    packed = torch.tensor([1.0 if requested else 0.0, *values], dtype=torch.float64, device=accelerator.device)
    total = accelerator.reduce(packed, "sum")
    return bool(total[0] > 0), [float(v) / accelerator.num_processes for v in total[1:]]
