"""SIGINT/SIGTERM as a flag the training loop checks, so it can checkpoint and exit cleanly."""

from __future__ import annotations

import logging
import signal
from typing import Any

log = logging.getLogger(__name__)


class StopSignal:
    """Turns SIGINT/SIGTERM into a flag the loop checks, so it can checkpoint and exit cleanly.

    A second signal restores the default behaviour (a second Ctrl-C stops at once).
    """

    def __init__(self) -> None:
        self.requested = False
        self._previous: dict[int, Any] = {}

    def _handle(self, signum, frame) -> None:
        log.warning("signal %s received: saving a checkpoint and stopping after this step", signum)
        self.requested = True
        for sig, handler in self._previous.items():
            signal.signal(sig, handler)

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
