"""TensorBoard event files mirroring ``metrics.jsonl``: every numeric field of every record, as the scalar
``<phase>/<field>`` at the record's step, in ``<out_dir>/tensorboard/``. Optional: without the ``tensorboard``
package (the ``tensorboard`` extra) the mirror is off, with one info line."""

from __future__ import annotations

import logging
import math
from pathlib import Path
from typing import Any, Callable

log = logging.getLogger(__name__)

TENSORBOARD = "tensorboard"


def tensorboard_mirror(folder: Path, resume_step: int | None) -> Callable[[dict[str, Any]], None] | None:
    """A function writing one metrics record as scalars, or None when tensorboard is not installed.
    ``resume_step``: a resumed run drops what the event files hold after its checkpoint's step."""
    import importlib.util

    if importlib.util.find_spec("tensorboard") is None:  # SummaryWriter needs the package (an optional extra)
        log.info("TensorBoard event files off: the tensorboard package is not installed "
                 "(pip install 'adapt[tensorboard]'); metrics.jsonl holds every figure")
        return None
    from torch.utils.tensorboard import SummaryWriter

    writer = SummaryWriter(log_dir=str(folder), purge_step=None if resume_step is None else resume_step + 1)

    def write(record: dict[str, Any]) -> None:
        step, phase = record.get("step"), record.get("phase", "run")
        if not isinstance(step, int):
            return
        for key, value in record.items():
            if key != "step" and isinstance(value, (int, float)) and not isinstance(value, bool) \
                    and math.isfinite(value):
                writer.add_scalar(f"{phase}/{key}", value, step)
        writer.flush()

    return write
