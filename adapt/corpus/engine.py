"""Where the prepare stage's per-document work and duplicate clustering run: ``engine.kind=local`` (worker processes
on this machine, the default) or ``engine.kind=dask`` (a Dask cluster, started locally or reached at
``engine.address``; adapt/corpus/engine_dask.py). Both give the same corpus; the stage only sees this interface.
"""

from __future__ import annotations

from contextlib import contextmanager
from typing import Iterator

import numpy as np

from adapt.common.errors import ConfigError
from adapt.config.prepare import PrepareJob
from adapt.corpus.docwork import Workers, WorkState


class LocalEngine:
    """runtime.num_proc processes (docwork.Workers); signatures come back to this process."""

    def __init__(self, cfg: PrepareJob):
        self.cfg = cfg

    def workers(self, state: WorkState) -> Workers:
        return Workers(self.cfg.runtime.num_proc, state)

    def collect_signatures(self, parts: list) -> np.ndarray | None:
        """The signature chunks of pass B as one (N, k) array (None without near-duplicate detection)."""
        if not self.cfg.dedup.near:
            return None
        return np.concatenate(parts) if parts else np.empty((0, self.cfg.dedup.num_hashes), np.uint32)

    def cluster_documents(self, hashes: np.ndarray, sigs: np.ndarray | None, quality: np.ndarray):  # noqa: ANN201
        from adapt.corpus.dedup import cluster_documents  # scipy

        d = self.cfg.dedup
        return cluster_documents(hashes, sigs, quality, d.bands, d.threshold, exact=d.exact, remove=d.remove)


@contextmanager
def open_engine(cfg: PrepareJob) -> Iterator:
    """The engine of ``cfg.engine.kind`` for the whole run; a cluster started here is shut down on exit."""
    if cfg.engine.kind == "local":
        yield LocalEngine(cfg)
        return
    try:
        from adapt.corpus.engine_dask import DaskEngine
    except ImportError as exc:
        raise ConfigError(f"engine.kind=dask needs Dask ({exc.name} is not installed); "
                          "pip install 'adapt[cluster]', or engine.kind=local") from exc
    with DaskEngine(cfg) as engine:
        yield engine
