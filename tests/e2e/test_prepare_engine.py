"""engine.kind=dask gives the corpus engine.kind=local gives, and bad cluster input ends in one error line.

The samples (corpora_samples/legal, with the legal preset's gold set and task folder) are prepared
on this machine's path and on a local Dask cluster of 2 worker processes started by the run itself.
"""

from __future__ import annotations

import gzip
import hashlib
import re
import socket
import time
from pathlib import Path

import pyarrow.parquet as pq
import pytest

pytest.importorskip("distributed", reason="engine.kind=dask needs the cluster extra")

from adapt.common.errors import ConfigError, InputError  # noqa: E402
from adapt.config.prepare import EngineConfig, PrepareJob, PrepareRuntimeConfig  # noqa: E402
from adapt.contracts.prepared_corpus import read_prepared  # noqa: E402
from adapt.stages.prepare import run  # noqa: E402

SAMPLES = Path(__file__).resolve().parents[2] / "corpora_samples"


def _config(out: Path, engine: EngineConfig, inputs: list[str] | None = None) -> PrepareJob:
    cfg = PrepareJob(inputs=inputs or [str(SAMPLES / "legal")], out_dir=str(out), domain="legal", chunk_docs=64,
                     runtime=PrepareRuntimeConfig(progress=False), engine=engine)
    cfg.quality.gold_path = str(SAMPLES / "quality_gold.jsonl")
    cfg.contamination.task_dir = str(SAMPLES / "tasks" / "legal")
    return cfg


def _outcome(out: Path) -> dict:
    removed = pq.read_table(out / "removed.parquet").to_pylist()
    split = {s: [r["id"] for r in read_prepared(out, s)] for s in ("train", "heldout")}
    cluster = {r["id"]: r["cluster_id"] for s in ("train", "heldout") for r in read_prepared(out, s)}
    kept_of = {r["id"]: re.search(r"kept (\S+)$", r["detail"]).group(1) for r in removed
               if r["reason"] in ("exact_duplicate", "near_duplicate")}
    return {"removed": {r["id"]: r["reason"] for r in removed}, "split": split, "cluster": cluster,
            "kept_of": kept_of}


def _hashes(folder: Path) -> dict[str, str]:
    return {str(p): hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(folder.rglob("*")) if p.is_file()}


def test_dask_engine_gives_the_local_corpus(tmp_path):
    before = _hashes(SAMPLES / "legal")
    local = run(_config(tmp_path / "local", EngineConfig()))
    dask = run(_config(tmp_path / "dask", EngineConfig(kind="dask", workers=2)))
    a, b = _outcome(tmp_path / "local"), _outcome(tmp_path / "dask")
    reasons = set(a["removed"].values())
    assert {"exact_duplicate", "near_duplicate"} <= reasons  # the global duplicate step had work to do
    assert a["removed"] == b["removed"]
    assert a["split"] == b["split"]
    assert a["kept_of"] == b["kept_of"]  # the same representative kept for each duplicate
    renaming = {}
    for doc, c in a["cluster"].items():  # cluster ids equal up to renaming: a bijection between the two runs
        assert renaming.setdefault(c, b["cluster"][doc]) == b["cluster"][doc]
    assert len(set(renaming.values())) == len(renaming)
    for key in ("funnel", "duplicates", "removed", "split", "personal_data", "quality", "contamination"):
        assert local[key] == dask[key], key
    assert {k: v for k, v in local["totals"].items() if k not in ("out_dir", "seconds")} == \
        {k: v for k, v in dask["totals"].items() if k not in ("out_dir", "seconds")}
    assert _hashes(SAMPLES / "legal") == before


def _closed_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]  # nothing listens there once the socket is closed


def test_address_that_does_not_answer_is_one_error_naming_the_key(tmp_path):
    address = f"tcp://127.0.0.1:{_closed_port()}"
    cfg = _config(tmp_path / "out", EngineConfig(kind="dask", address=address, connect_timeout_s=2))
    start = time.monotonic()
    with pytest.raises(ConfigError) as err:
        run(cfg)
    assert time.monotonic() - start < 30
    message = str(err.value)
    assert f"engine.address={address}" in message and "engine.address=null" in message
    assert "\n" not in message


def test_unreadable_file_under_the_engine_names_the_file(tmp_path):
    inp = tmp_path / "in"
    inp.mkdir()
    good = gzip.compress(b'{"id": "a", "text": "the tenant paid the rent for three months in full and on time"}\n')
    (inp / "a.jsonl.gz").write_bytes(good)
    (inp / "b.jsonl.gz").write_bytes(good[: len(good) // 2])  # truncated: gzip stops half way
    before = _hashes(inp)
    cfg = _config(tmp_path / "out", EngineConfig(kind="dask", workers=1), inputs=[str(inp)])
    with pytest.raises(InputError) as err:
        run(cfg)
    assert str(inp / "b.jsonl.gz") in str(err.value) and "\n" not in str(err.value)
    assert _hashes(inp) == before


def test_worker_that_dies_is_retried_then_reported_in_one_line(tmp_path):
    import os

    import dask

    from adapt.common.errors import UserError
    from adapt.corpus.docwork import WorkState
    from adapt.corpus.engine_dask import DaskEngine

    marker = tmp_path / "died_once"

    def die_once(chunk):  # the first try kills its worker process; the retry on a fresh worker succeeds
        if not marker.exists():
            marker.touch()
            os._exit(1)
        return chunk

    def die_always(chunk):
        os._exit(1)

    cfg = _config(tmp_path / "out", EngineConfig(kind="dask", workers=1))
    with dask.config.set({"distributed.scheduler.allowed-failures": 1}), DaskEngine(cfg) as engine:
        with engine.workers(WorkState(cfg)) as workers:
            assert list(workers.imap(die_once, [["a"], ["b"]])) == [["a"], ["b"]]
            with pytest.raises(UserError) as err:
                list(workers.imap(die_always, [["c"]]))
    assert marker.exists() and "worker died" in str(err.value) and "\n" not in str(err.value)
