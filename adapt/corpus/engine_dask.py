"""engine.kind=dask: the prepare stage's per-document work and global near-duplicate clustering on a Dask cluster.

This process still reads the inputs and writes the outputs; workers get chunks of text (so they need no access to
the input files, only adapt installed at the same version), run docwork's functions, and keep each chunk's
MinHash signatures and document hashes. Clustering then runs where those live (lsh_global.py): a shuffle of
(band, key, number) rows to reducers, candidate pairs per bucket, a two-step join that verifies each pair beside
its signatures, and a tree reduction of union-find forests; only the forest (documents with a duplicate) comes back.
"""

from __future__ import annotations

import logging
import math
import operator
import uuid
from collections import deque
from dataclasses import dataclass
from typing import Any, Callable, Iterable, Iterator

import numpy as np
from distributed import Client, LocalCluster
from distributed.scheduler import KilledWorker

from adapt.common.errors import ConfigError, UserError
from adapt.config.prepare import PrepareJob
from adapt.corpus import lsh_global as lg
from adapt.corpus.docwork import WorkState, filter_chunk, init_worker

log = logging.getLogger(__name__)
_MAX_PARTITION_ROWS = 200_000  # signatures per clustering partition: 200k x 128 x 4 bytes = 100 MB
_STATE_TOKEN: dict[str, str | None] = {"token": None}  # which WorkState this worker process holds


def _ensure_state(state: WorkState, token: str) -> None:
    if _STATE_TOKEN["token"] != token:
        init_worker(state)
        _STATE_TOKEN["token"] = token


def _call(func: Callable, state: WorkState, token: str, chunk: list) -> Any:
    _ensure_state(state, token)
    return func(chunk)


def _filter_remote(state: WorkState, token: str, chunk: list) -> tuple:
    """filter_chunk, with the signatures and document hashes split off to stay on the worker."""
    _ensure_state(state, token)
    res = filter_chunk(chunk)
    part = (res.signatures, np.array([d["doc_hash"] for d in res.kept], dtype=np.uint64))
    res.signatures = None
    return res, part


def _identity(value: Any) -> Any:
    return value


def _concat_parts(*parts: tuple) -> tuple:
    sigs = [p[0] for p in parts if p[0] is not None]
    return (np.concatenate(sigs) if sigs else None), np.concatenate([p[1] for p in parts])


def _edges_of(verified: tuple) -> np.ndarray:
    return verified[0]


def _counts(verified: tuple) -> tuple[int, int]:
    return verified[1], len(verified[0])


@dataclass
class RemotePart:
    """One chunk's (signatures, document hashes) on the cluster."""
    future: Any
    rows: int


@dataclass
class RemoteSignatures:
    """The corpus' (signatures, hashes) in contiguous partitions; ``offsets`` are their first global numbers."""
    parts: list
    offsets: np.ndarray
    rows: int


class DaskWorkers:
    """``imap`` in input order over a Dask cluster, at most 4 chunks per worker thread in flight."""

    def __init__(self, engine: "DaskEngine", state: WorkState):
        self.engine = engine
        self.client = engine.client
        self.token = uuid.uuid4().hex
        # a task result, not scattered data: when a worker dies the scheduler can rebuild it from the task
        self.state = self.client.submit(_identity, state, pure=False)

    def __enter__(self) -> "DaskWorkers":
        return self

    def _submit(self, func: Callable, chunk: list) -> tuple:
        c = self.client
        if func is filter_chunk:
            both = c.submit(_filter_remote, self.state, self.token, chunk, pure=False)
            return c.submit(operator.getitem, both, 0, pure=False), c.submit(operator.getitem, both, 1, pure=False)
        return c.submit(_call, func, self.state, self.token, chunk, pure=False), None

    def _result(self, pending: tuple) -> Any:
        res = self.engine.wait(pending[0])
        if pending[1] is not None:
            res.signatures = RemotePart(pending[1], len(res.kept))
        return res

    def imap(self, func: Callable, chunks: Iterable) -> Iterator:
        in_flight = 4 * self.engine.threads
        pending: deque = deque()
        for chunk in chunks:
            pending.append(self._submit(func, chunk))
            if len(pending) >= in_flight:
                yield self._result(pending.popleft())
        while pending:
            yield self._result(pending.popleft())

    def __exit__(self, *exc: object) -> None:
        self.state.release()


class DaskEngine:
    def __init__(self, cfg: PrepareJob):
        self.cfg = cfg
        self.cluster: LocalCluster | None = None
        self.client: Client | None = None
        self.threads = 1

    def __enter__(self) -> "DaskEngine":
        e = self.cfg.engine
        if e.address:
            try:
                self.client = Client(e.address, timeout=e.connect_timeout_s, set_as_default=False)
            except (OSError, TimeoutError, ValueError) as exc:
                raise ConfigError(
                    f"engine.address={e.address}: no Dask scheduler answered within {e.connect_timeout_s:g} s "
                    f"({type(exc).__name__}); start one there (`dask scheduler`, then `dask worker {e.address}` on "
                    "each machine), fix the address, or set engine.address=null for a local cluster") from None
        else:
            self.cluster = LocalCluster(n_workers=e.workers, threads_per_worker=1, processes=True,
                                        dashboard_address=None, silence_logs=logging.ERROR)
            self.client = Client(self.cluster, set_as_default=False)
        self.threads = max(1, sum(self.client.nthreads().values()))
        log.info("dask engine: %d worker thread(s) at %s", self.threads, self.client.scheduler.address)
        return self

    def __exit__(self, *exc: object) -> None:
        if self.client is not None:
            self.client.close()
        if self.cluster is not None:
            self.cluster.close()

    def wait(self, future: Any) -> Any:
        """A future's result; a worker that died on every retry, or a lost scheduler, becomes one error line."""
        try:
            return future.result()
        except KilledWorker as exc:
            raise UserError(f"engine: a Dask worker died on every try of one task ({exc}); the usual cause is "
                            "memory: give the workers more, or lower chunk_docs") from None
        except (OSError, TimeoutError) as exc:
            where = self.cfg.engine.address or "the local cluster"
            raise UserError(f"engine.address={where}: lost the Dask scheduler ({type(exc).__name__}: {exc}); "
                            "check that it is still running, then rerun") from None

    def workers(self, state: WorkState) -> DaskWorkers:
        return DaskWorkers(self, state)

    def collect_signatures(self, parts: list[RemotePart]) -> RemoteSignatures:
        """The chunk parts joined into a few contiguous partitions (the clustering's unit of work)."""
        rows = sum(p.rows for p in parts)
        target = min(max(self.cfg.chunk_docs, math.ceil(rows / (2 * self.threads))), _MAX_PARTITION_ROWS)
        groups: list[list[RemotePart]] = []
        for p in parts:
            if not groups or sum(q.rows for q in groups[-1]) >= target:
                groups.append([])
            groups[-1].append(p)
        merged = [self.client.submit(_concat_parts, *[p.future for p in g], pure=False) for g in groups]
        sizes = [sum(p.rows for p in g) for g in groups]
        return RemoteSignatures(merged, np.cumsum([0] + sizes[:-1]).astype(np.int64), rows)

    def cluster_documents(self, hashes: np.ndarray, sigs: RemoteSignatures, quality: np.ndarray):  # noqa: ANN201
        from adapt.corpus.dedup import clusters_from_labels

        d = self.cfg.dedup
        n = hashes.size
        if n != sigs.rows:
            raise RuntimeError(f"{sigs.rows} signature rows on the cluster for {n} kept documents")
        n_cand = n_ver = 0
        nodes = roots = np.empty(0, np.int64)
        if n and (d.exact or d.near):
            (nodes, roots), n_cand, n_ver = self._global_forest(sigs, n, d.near and n > 1)
            if d.near:
                log.info("near duplicates: %d candidate pairs, %d verified at estimated Jaccard >= %.2f",
                         n_cand, n_ver, d.threshold)
        labels = lg.labels_from_forest(n, nodes, roots)
        return clusters_from_labels(labels, hashes, quality, d.exact, d.remove, n_cand, n_ver)

    def _global_forest(self, sigs: RemoteSignatures, n: int, near: bool) -> tuple:
        d, c = self.cfg.dedup, self.client
        parts, offsets = sigs.parts, sigs.offsets
        bounds = np.r_[offsets, n]
        width = len(parts)

        def pick(future: Any, i: int) -> Any:
            return c.submit(operator.getitem, future, i, pure=False)

        routed = [c.submit(lg.route_rows, p, int(o), d.bands, width, near, d.exact, pure=False)
                  for p, o in zip(parts, offsets)]
        reduced = [c.submit(lg.bucket_pairs, *[pick(rt, r) for rt in routed], pure=False) for r in range(width)]
        edge_lists = [pick(red, 1) for red in reduced]  # exact copies: edges without verification
        counts = []
        if near:
            by_left = [c.submit(lg.split_by_owner, pick(red, 0), bounds, 0, pure=False) for red in reduced]
            left = [c.submit(lg.split_left, c.submit(lg.attach_left, parts[p], int(offsets[p]),
                                                     *[pick(b, p) for b in by_left], pure=False), bounds, pure=False)
                    for p in range(width)]
            verified = [c.submit(lg.verify_right, parts[q], int(offsets[q]), d.threshold,
                                 *[pick(lf, q) for lf in left], pure=False) for q in range(width)]
            edge_lists += [c.submit(_edges_of, v, pure=False) for v in verified]
            counts = [c.submit(_counts, v, pure=False) for v in verified]
        level = [c.submit(lg.forest, e, pure=False) for e in edge_lists]
        while len(level) > 1:  # tree reduction, 4 forests at a time
            level = [c.submit(lg.merge_forests, *level[i:i + 4], pure=False) for i in range(0, len(level), 4)]
        result = self.wait(level[0])
        totals = np.array([self.wait(x) for x in counts]).reshape(-1, 2).sum(axis=0)
        return result, int(totals[0]), int(totals[1])
