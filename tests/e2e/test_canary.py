"""The canary job end to end on a tiny BERT: plant into a copy of a prepared corpus, pretrain on it, audit the
run; and its one-line refusals through the console script."""

from __future__ import annotations

import json
import math
import statistics
from collections import Counter
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from adapt.common.io import hash_file
from adapt.config import compose_job
from adapt.config.report import ReportJob
from adapt.reporting.values import fmt
from adapt.stages import canary, pretrain
from adapt.stages import report as report_stage
from tests.conftest import start_console
from tests.e2e.test_pretrain import write_prepared


def _scored_corpus(folder: Path) -> Path:
    """A prepared corpus whose train split carries quality and cluster ids, as the prepare job writes them."""
    write_prepared(folder)
    shard = folder / "train" / "part-00000.parquet"
    table = pq.read_table(shard)
    n = table.num_rows
    table = table.append_column("quality", pa.array([i / n for i in range(n)], pa.float32()))
    table = table.append_column("cluster_id", pa.array(list(range(n)), pa.int64()))
    pq.write_table(table, shard)
    return folder


def _files(folder: Path) -> dict[str, str]:
    return {str(p.relative_to(folder)): hash_file(p) for p in sorted(folder.rglob("*")) if p.is_file()}


def test_plant_pretrain_audit(tmp_path, tiny_encoder):
    corpus = _scored_corpus(tmp_path / "corpus")
    before = _files(corpus)
    out = tmp_path / "planted"
    result = canary.run(compose_job("canary", ["mode=plant", f"corpus={corpus}", f"out_dir={out}",
                                               "plant.repeats=[1,3]", "plant.per_repeat=2", "plant.controls=2",
                                               "runtime.progress=false"]))
    assert _files(corpus) == before, "the corpus must not change"
    for name, digest in before.items():  # the copy holds every original shard byte for byte
        assert _files(out)[name] == digest
    rows = pq.read_table(out / "train" / canary.CANARY_SHARD).to_pylist()
    cans = json.loads((out / canary.CANARIES).read_text())["canaries"]
    seen = Counter(r["text"] for r in rows)
    assert len(rows) == result["planted_rows"] == 2 * 1 + 2 * 3
    for c in cans:
        assert seen.get(c["text"], 0) == c["repeats"]  # controls (repeats 0) never appear
    assert sum(c["repeats"] == 0 for c in cans) == 2
    original = pq.read_table(corpus / "train" / "part-00000.parquet")
    assert rows[0]["quality"] == pytest.approx(statistics.median(original.column("quality").to_pylist()))
    assert min(r["cluster_id"] for r in rows) == original.num_rows  # after the corpus's own cluster ids
    assert len({r["cluster_id"] for r in rows}) == 4

    run_dir = tmp_path / "run"
    pretrain.run(compose_job("pretrain", [
        f"corpus_dir={out}", f"out_dir={run_dir}", "debug=tiny", f"encoder.name_or_path={tiny_encoder}",
        "encoder.random_init=false", "runtime.progress=false", "runtime.num_threads=1", "eval.pppl_max_tokens=0"]))
    audit_dir = tmp_path / "audit"
    result = canary.run(compose_job("canary", ["mode=audit", f"planted={out}", f"encoder.name_or_path={run_dir}",
                                               f"out_dir={audit_dir}", "audit.candidates=31",
                                               "runtime.progress=false", "runtime.num_threads=1"]))
    report = json.loads((audit_dir / canary.EXPOSURE).read_text())
    assert report["max_exposure"] == pytest.approx(math.log2(32))
    assert len(report["canaries"]) == len(cans)
    assert all(0.0 <= r["exposure"] <= report["max_exposure"] and 1 <= r["rank"] <= 32 for r in report["canaries"])
    assert set(report["mean_exposure_by_repeats"]) == {"0", "1", "3"}
    assert json.loads((audit_dir / "manifest.json").read_text())["status"] == "completed"
    assert any("controls (never planted)" in line for line in result["summary"])

    page = report_stage.run(ReportJob(canary_dir=str(audit_dir), out_dir=str(tmp_path / "report")))
    md = Path(page["markdown"]).read_text(encoding="utf-8")
    assert "Memorisation audit (canaries)" in md and "canary_dir" not in page["missing"]
    means = report["mean_exposure_by_repeats"]
    assert f"| controls (never planted) | 2 | {fmt(means['0'], 2)} |" in md
    assert f"| planted 3× | 2 | {fmt(means['3'], 2)} |" in md


@pytest.mark.slow
def test_console_script_refuses_in_one_line(tmp_path, tiny_encoder):
    empty = tmp_path / "empty"
    empty.mkdir()
    corpus = write_prepared(tmp_path / "corpus")
    before = _files(corpus)
    procs = [(start_console("adapt-canary", [f"out_dir={tmp_path / 'a'}"], tmp_path), "mode is not set"),
             # refused at compose time, before Hydra would write .hydra/ into the corpus
             (start_console("adapt-canary", ["mode=plant", f"corpus={corpus}", f"out_dir={corpus / 'planted'}"],
                            tmp_path), "is inside the input folder"),
             (start_console("adapt-canary", ["mode=audit", f"planted={empty}", f"out_dir={tmp_path / 'b'}",
                                             f"encoder.name_or_path={tiny_encoder}"], tmp_path), "canaries.json")]
    for proc, needle in procs:
        _, err = proc.communicate(timeout=180)
        errors = [ln for ln in err.splitlines() if ln.startswith("error:")]
        assert proc.returncode == 2 and len(errors) == 1 and needle in errors[0], err
        assert "Traceback" not in err
    assert _files(corpus) == before and not (corpus / "planted").exists()
