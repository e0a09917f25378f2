"""Fixtures of every end-to-end test."""

from __future__ import annotations

import pytest
import torch


@pytest.fixture(autouse=True)
def _restore_threads():
    # the stages apply runtime.num_threads (1 is faster for the tiny model) process-wide; give other tests theirs
    before = torch.get_num_threads()
    yield
    torch.set_num_threads(before)
