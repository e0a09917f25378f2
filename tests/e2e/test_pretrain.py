"""The pretrain job end to end on a tiny random BERT."""

from __future__ import annotations

import json
import random
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import pytest
import torch
from safetensors.torch import load_file

from adapt.config import compose_job
from adapt.stages.pretrain import run

WORDS = ("the court tenant landlord notice contract clause appeal judgment patient ward dose nurse scan "
         "report claim rent months of and to a in is was for on by with").split()


def write_prepared(folder: Path, n_train: int = 60, n_heldout: int = 12, seed: int = 0) -> Path:
    rng = random.Random(seed)
    for split, n in (("train", n_train), ("heldout", n_heldout)):
        texts = [" ".join(rng.choice(WORDS) for _ in range(rng.randint(20, 60))) + "." for _ in range(n)]
        (folder / split).mkdir(parents=True, exist_ok=True)
        pq.write_table(pa.table({"id": [f"{split}-{i}" for i in range(n)], "text": texts}),
                       folder / split / "part-00000.parquet")
    return folder


def tiny_cfg(tmp_path: Path, encoder: Path, out: str, *extra: str):
    corpus = tmp_path / "corpus"
    if not corpus.exists():
        write_prepared(corpus)
    return compose_job("pretrain", [f"corpus_dir={corpus}", f"out_dir={tmp_path / out}", "debug=tiny",
                                    f"encoder.name_or_path={encoder}", "encoder.random_init=false",
                                    "runtime.progress=false", "eval.pppl_max_tokens=0", *extra])


def test_fresh_run_writes_the_contract(tmp_path, tiny_encoder_headless):
    result = run(tiny_cfg(tmp_path, tiny_encoder_headless, "run", "eval.pppl_max_tokens=32"))
    out = tmp_path / "run"
    assert result["completed"] and result["step"] == 4
    assert result["head_missing"], "the headless encoder must be detected"
    records = [json.loads(l) for l in (out / "metrics.jsonl").read_text().splitlines()]
    phases = [r["phase"] for r in records]
    assert phases[0] == "head_warmup" and "start" in phases and phases[-1] == "end"
    assert [r["step"] for r in records if r["phase"] == "train"] == [1, 2, 3, 4]
    start, end = records[phases.index("start")], records[-1]
    for key in ("heldout_loss_domain", "pppl_domain"):
        assert key in start and key in end and start[key] > 1.0
    assert start["pppl_domain"] != end["pppl_domain"], "training must move the held-out figure"
    from transformers import AutoModelForMaskedLM

    for folder in ("base", "final"):
        _, info = AutoModelForMaskedLM.from_pretrained(out / folder, output_loading_info=True)
        assert not info["missing_keys"], f"{folder}/ must hold a complete MLM model"
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["status"] == "completed" and manifest["inputs"]


def test_head_warmup_changes_only_the_head(tmp_path, tiny_encoder_headless):
    run(tiny_cfg(tmp_path, tiny_encoder_headless, "run", "schedule.max_steps=1", "schedule.warmup_steps=0",
                 "schedule.stop_after_steps=1"))
    original = load_file(str(tiny_encoder_headless / "model.safetensors"))
    base = load_file(str(tmp_path / "run" / "base" / "model.safetensors"))
    for key, value in original.items():
        assert torch.equal(value, base[key]), f"warm-up changed encoder weight {key}"


def test_four_steps_equal_two_plus_resume_plus_two(tmp_path, tiny_encoder):
    # bit-for-bit: weights, optimizer moments and data order are all restored (common practice for resumable runs)
    run(tiny_cfg(tmp_path, tiny_encoder, "straight", "checkpoint.save_every_steps=4"))
    first = run(tiny_cfg(tmp_path, tiny_encoder, "resumed", "schedule.stop_after_steps=2"))
    assert not first["completed"] and first["step"] == 2
    second = run(tiny_cfg(tmp_path, tiny_encoder, "resumed"))
    assert second["completed"] and second["step"] == 4
    a = load_file(str(tmp_path / "straight" / "final" / "model.safetensors"))
    b = load_file(str(tmp_path / "resumed" / "final" / "model.safetensors"))
    assert a.keys() == b.keys()
    for key in a:
        assert torch.equal(a[key], b[key]), key
    losses = lambda d: [json.loads(l)["loss"] for l in (tmp_path / d / "metrics.jsonl").read_text().splitlines()
                        if json.loads(l)["phase"] == "train"]
    assert losses("straight") == losses("resumed")


def test_resume_never_refuses_an_existing_run(tmp_path, tiny_encoder):
    run(tiny_cfg(tmp_path, tiny_encoder, "run", "schedule.stop_after_steps=2"))
    from adapt.common.errors import ConfigError

    with pytest.raises(ConfigError, match="resume=never"):
        run(tiny_cfg(tmp_path, tiny_encoder, "run", "resume=never"))


@pytest.mark.parametrize("kind", ["full", "lora", "embeddings", "top_layers"])
def test_every_adapter_trains_and_exports(tmp_path, tiny_encoder, kind):
    result = run(tiny_cfg(tmp_path, tiny_encoder, kind, f"adapter={kind}", "adapter.num_top_layers=1"))
    from transformers import AutoModelForMaskedLM

    model, info = AutoModelForMaskedLM.from_pretrained(tmp_path / kind / "final", output_loading_info=True)
    assert not info["missing_keys"] and not info["unexpected_keys"]
    assert 0 < result["trainable_parameters"] <= result["total_parameters"]


def test_head_warmup_stops_when_the_loss_levels_off(tmp_path, tiny_encoder_headless):
    run(tiny_cfg(tmp_path, tiny_encoder_headless, "run", "head_warmup.steps=40", "head_warmup.window_steps=2",
                 "head_warmup.min_improvement=0.9", "schedule.stop_after_steps=1"))
    warm = json.loads((tmp_path / "run" / "metrics.jsonl").read_text().splitlines()[0])
    # a 90% improvement between windows of 2 steps is impossible, so it stops at the first check
    assert warm["phase"] == "head_warmup" and warm["converged"] and warm["steps"] == 4
    assert len(warm["losses"]) == 4
