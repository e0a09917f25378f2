"""The demo chain end to end (tiny random model) and the packaged encoder through pretrain (slow)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from adapt.config import compose_job


def test_demo_chain_runs_on_the_samples(tmp_path):
    from adapt.stages.demo import run

    cfg = compose_job("demo", ["debug=tiny", f"out_dir={tmp_path / 'demo'}", "pretrain.runtime.progress=false",
                               "compare.runtime.progress=false", "score.runtime.progress=false",
                               "prepare.runtime.progress=false", "prepare_general.runtime.progress=false"])
    result = run(cfg)
    out = tmp_path / "demo"
    for path in ("prepared/profile.json", "prepared_general/profile.json", "pretrain/final/model.safetensors",
                 "score/adapted-domain/scores.json", "score/base-general/scores.json", "compare/comparison.json",
                 "demo.json", "manifest.json", "report/report.html", "report/report.json"):
        assert (out / path).exists(), path
    text = "\n".join(result["summary"])
    assert "pseudo-perplexity" in text and "verdict" in text and "not legal or medical advice" in text
    assert "paired ratio adapted / base" in text and "resampling documents" in text
    assert "domain gap (macro-F1, index: base on test = 100):" in text and "adapted on letters:" in text
    assert "cost: adapted took" in text and "per hour of pretraining" in text
    assert result["summary"][-1] == f"report: {(out / 'report' / 'report.html').resolve()}"
    timings = json.loads((out / "demo.json").read_text())["timings_seconds"]
    assert {"prepare", "pretrain", "compare"} <= set(timings)


@pytest.mark.slow
def test_packaged_encoder_head_is_detected_and_warmed_up(tmp_path):
    from adapt.stages.pretrain import run
    from tests.e2e.test_pretrain import write_prepared

    corpus = write_prepared(tmp_path / "corpus", n_train=24, n_heldout=4)
    cfg = compose_job("pretrain", [f"corpus_dir={corpus}", f"out_dir={tmp_path / 'run'}", "encoder=minilm",
                                   "encoder.max_seq_len=64", "schedule.max_steps=2", "schedule.warmup_steps=0",
                                   "schedule.batch_size=4", "head_warmup.sample_seqs=12", "head_warmup.max_epochs=3",
                                   "eval.pppl_max_tokens=0",
                                   "eval.max_heldout_seqs=4", "runtime.progress=false"])
    result = run(cfg)
    # PITFALLS: the packaged encoder lacks cls.predictions.transform.* and the decoder bias
    assert any(k.startswith("cls.predictions.transform") for k in result["head_missing"])
    records = [json.loads(l) for l in (tmp_path / "run" / "metrics.jsonl").read_text().splitlines()]
    warm = next(r for r in records if r["phase"] == "head_warmup")
    assert 1 <= warm["epochs"] <= 3 and warm["last_loss"] < warm["first_loss"]
    from transformers import AutoModelForMaskedLM

    _, info = AutoModelForMaskedLM.from_pretrained(Path(tmp_path / "run" / "final"), output_loading_info=True)
    assert not info["missing_keys"]
