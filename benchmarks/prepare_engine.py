"""The prepare stage on this machine's path and on a local Dask cluster; and Dask vs Ray on the per-document work.

Prints one JSON object. The corpus is prepare_throughput.py's generator (Zipf pseudo-words, 8% near and 4% exact
copies, fixed seed). Each run is a fresh process; for the Dask runs it starts a LocalCluster of 1 or 2 worker
processes (one thread each) and hands its address to the stage, then reads every worker's peak RSS.

    .venv/bin/python benchmarks/prepare_engine.py --sizes 100000 300000
    PYTHONPATH=/path/to/ray .venv/bin/python benchmarks/prepare_engine.py --compare-engines --sizes 100000
"""

from __future__ import annotations

import argparse
import importlib.util
import inspect
import json
import multiprocessing as mp
import os
import queue as queue_module
import resource
import tempfile
import time
from pathlib import Path

os.environ.setdefault("HF_HUB_OFFLINE", "1")
os.environ.setdefault("TOKENIZERS_PARALLELISM", "false")


def _generator():
    path = Path(__file__).with_name("prepare_throughput.py")
    spec = importlib.util.spec_from_file_location("prepare_throughput", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module.make_corpus


def _peak_rss_mib() -> float:
    return round(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024, 1)


def _cpu_s() -> float:
    usage = resource.getrusage(resource.RUSAGE_SELF)
    return round(usage.ru_utime + usage.ru_stime, 1)


def _prepare_child(folder: str, workers: int, queue: mp.Queue) -> None:
    """workers=0: engine.kind=local with one process; else a Dask LocalCluster of that many processes."""
    from adapt.config.prepare import EngineConfig, PrepareJob, PrepareRuntimeConfig
    from adapt.stages.prepare import run

    cfg = PrepareJob(inputs=[f"{folder}/in"], out_dir=f"{folder}/out", runtime=PrepareRuntimeConfig(progress=False))
    cfg.quality.gold_path = None  # heuristic score: no gold set is needed for synthetic text
    cfg.profile.general_path = None
    cfg.profile.sample_docs = 500
    cluster = client = None
    if workers:
        from distributed import Client, LocalCluster

        cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, dashboard_address=None)
        client = Client(cluster)
        cfg.engine = EngineConfig(kind="dask", address=cluster.scheduler_address)
    t0 = time.perf_counter()
    result = run(cfg)
    seconds = time.perf_counter() - t0
    out = {"seconds": round(seconds, 1), "driver_and_scheduler_peak_rss_mib": _peak_rss_mib(),
           "driver_and_scheduler_cpu_s": _cpu_s(),  # this process: reading, writing, and the scheduler
           "docs_kept": result["totals"]["docs_kept"], "duplicates": {
               k: result["duplicates"][k] for k in ("exact_duplicates", "near_duplicates", "candidate_pairs",
                                                    "verified_pairs")}}
    if client is not None:
        out["worker_peak_rss_mib"] = sorted(client.run(_peak_rss_mib).values())
        out["worker_cpu_s"] = sorted(client.run(_cpu_s).values())
        client.close()
        cluster.close()
    queue.put(out)


def _write_corpus(docs: list[str], folder: Path) -> None:
    (folder / "in").mkdir()
    with open(folder / "in" / "docs.jsonl", "w", encoding="utf-8") as fh:
        for i, d in enumerate(docs):
            fh.write(json.dumps({"id": f"d{i}", "text": d}) + "\n")


def _in_child(target, *args) -> dict:  # noqa: ANN001
    """Run target(*args, queue) in a fresh process (its peak memory is its own); its result, or its failure."""
    ctx = mp.get_context("spawn")
    queue: mp.Queue = ctx.Queue()
    proc = ctx.Process(target=target, args=(*args, queue))
    proc.start()
    while True:
        try:
            res = queue.get(timeout=5)
            break
        except queue_module.Empty:
            if not proc.is_alive():
                return {"failed": f"exit code {proc.exitcode}"}
    proc.join()
    return res


def time_prepare(folder: Path, n_docs: int, workers: int) -> dict:
    res = _in_child(_prepare_child, str(folder), workers)
    if "failed" in res:
        return res
    res["docs_per_s"] = round(n_docs / res["seconds"], 1)
    res["engine"] = "local (1 process)" if workers == 0 else f"dask ({workers} worker processes)"
    return res


def shuffle_bytes(kept: int, candidates: int, bands: int = 32, num_hashes: int = 128) -> dict:
    """Bytes the global duplicate step moves between workers: (band, key, number) rows of 3 x 8 bytes per kept
    document and band, plus each candidate pair (2 x 8 bytes) with one signature (num_hashes x 4 bytes)."""
    return {"band_rows": kept * bands * 24, "candidate_join": candidates * (16 + 4 * num_hashes)}


# --- engine comparison: the same per-document work (normalise + filters + signatures) as an ordered map ---

def _work_state():
    from adapt.config.prepare import PrepareJob
    from adapt.corpus.docwork import WorkState
    from adapt.corpus.quality import heuristic_model

    cfg = PrepareJob(inputs=["-"])
    return WorkState(cfg, frozenset(), heuristic_model("en"), None)


def process_chunk(state, chunk: list) -> tuple[int, object]:  # noqa: ANN001
    """One chunk of (id, text, source) through pass A and pass B's per-document code; (kept, signatures)."""
    from adapt.corpus import docwork

    if docwork._STATE.get("state") is not state:
        docwork.init_worker(state)
    rows = [{"id": i, "text": t, "source": s, "markup_share": m}
            for i, t, s, m, *_ in docwork.normalise_chunk(chunk) if t]
    res = docwork.filter_chunk(rows)
    return len(res.kept), res.signatures


def map_dask(chunks: list, state, workers: int) -> tuple[list, list]:  # noqa: ANN001
    from distributed import Client, LocalCluster

    with LocalCluster(n_workers=workers, threads_per_worker=1, dashboard_address=None) as cluster, \
            Client(cluster) as client:
        st = client.submit(lambda s: s, state)
        futures = [client.submit(process_chunk, st, c, pure=False) for c in chunks]
        out = [f.result() for f in futures]
        return out, sorted(client.run(_peak_rss_mib).values())


def map_ray(chunks: list, state, workers: int) -> tuple[list, list]:  # noqa: ANN001
    import ray

    ray.init(num_cpus=workers, include_dashboard=False, log_to_driver=False)
    try:
        task = ray.remote(process_chunk)  # process_chunk of the named module (see _engine_child)
        st = ray.put(state)
        out = ray.get([task.remote(st, c) for c in chunks])
        peak = ray.remote(lambda: (os.getpid(), _peak_rss_mib()))
        rss = dict(ray.get([peak.remote() for _ in range(8 * workers)]))
        return out, sorted(rss.values())
    finally:
        ray.shutdown()


def _engine_child(name: str, docs: list[str], workers: int, queue: mp.Queue) -> None:
    chunks = [[(f"d{i}", d, "gen") for i, d in enumerate(docs[lo:lo + 256], lo)] for lo in range(0, len(docs), 256)]
    import prepare_engine as named  # this file by its module name, so that worker processes can import it

    state = named._work_state()
    mapper = {"dask": named.map_dask, "ray": named.map_ray}[name]
    t0 = time.perf_counter()
    out, worker_rss = mapper(chunks, state, workers)
    seconds = time.perf_counter() - t0
    queue.put({"engine": name, "workers": workers, "seconds_incl_start": round(seconds, 1),
               "docs_per_s": round(len(docs) / seconds, 1), "kept": sum(k for k, _ in out),
               "driver_peak_rss_mib": _peak_rss_mib(), "worker_peak_rss_mib": worker_rss,
               "adapter_lines": len(inspect.getsource(mapper).splitlines()), "load_average_after": os.getloadavg()})


def compare_engines(docs: list[str], order: list[str], workers: int = 2) -> list[dict]:
    return [_in_child(_engine_child, name, docs, workers) for name in order]


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[100_000])
    ap.add_argument("--workers", type=int, nargs="+", default=[0, 1, 2], help="0 = engine.kind=local")
    ap.add_argument("--compare-engines", action="store_true", help="only Dask vs Ray on the per-document work")
    ap.add_argument("--engines", nargs="+", default=["dask", "ray"], help="order of --compare-engines runs")
    args = ap.parse_args(argv)
    make_corpus = _generator()
    report: dict = {"cpu_count": os.cpu_count(), "load_average_before": os.getloadavg()}
    for n in args.sizes:
        docs, _, _ = make_corpus(n)
        if args.compare_engines:
            report[f"engines_{n}"] = compare_engines(docs, args.engines)
            continue
        with tempfile.TemporaryDirectory() as tmp:
            _write_corpus(docs, Path(tmp))
            del docs
            runs = []
            for w in args.workers:
                runs.append(time_prepare(Path(tmp), n, w))
                runs[-1]["load_average_after"] = os.getloadavg()
                print(json.dumps(runs[-1]), flush=True)
            report[f"docs_{n}"] = runs
            done = [r for r in runs if "duplicates" in r]
            if done:
                kept, cand = done[-1]["docs_kept"], done[-1]["duplicates"]["candidate_pairs"]
                report[f"docs_{n}"].append({"shuffle_bytes": shuffle_bytes(kept, cand)})
    report["load_average_after"] = os.getloadavg()
    print(json.dumps(report, indent=2))


if __name__ == "__main__":
    main()
