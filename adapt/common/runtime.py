"""Apply the shared ``runtime`` config group: CPU threads and the device every model job runs on."""

from __future__ import annotations

import torch

from adapt.config.common import RuntimeConfig


def apply_threads(runtime: RuntimeConfig) -> None:
    """Set torch's CPU thread count when the config asks for one (0 keeps torch's default)."""
    if runtime.num_threads > 0:
        torch.set_num_threads(runtime.num_threads)


def resolve_device(runtime: RuntimeConfig) -> torch.device:
    """``auto`` picks a GPU when one is visible, else the CPU."""
    if runtime.device == "auto":
        return torch.device("cuda" if torch.cuda.is_available() else "cpu")
    return torch.device(runtime.device)
