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
                                    "runtime.progress=false", "runtime.num_threads=1", "eval.pppl_max_tokens=0",
                                    *extra])


def test_fresh_run_writes_the_contract(tmp_path, tiny_encoder_headless):
    result = run(tiny_cfg(tmp_path, tiny_encoder_headless, "run", "eval.pppl_max_tokens=120"))
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
    for figures in (start, end):  # a 95% bootstrap interval over the sampled documents around each figure
        assert figures["pppl_domain_ci_low"] <= figures["pppl_domain"] <= figures["pppl_domain_ci_high"]
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


RESUME_CASES = [("full", 1), ("lora", 2), ("embeddings", 2), ("top_layers", 2)]


def _train_records(folder: Path) -> list[dict]:
    return [r for r in map(json.loads, (folder / "metrics.jsonl").read_text().splitlines()) if r["phase"] == "train"]


@pytest.mark.parametrize("kind,accum", RESUME_CASES, ids=[f"{k}-accum{a}" for k, a in RESUME_CASES])
def test_n_steps_equal_half_plus_resume_plus_half(tmp_path, tiny_encoder, kind, accum):
    # bit-for-bit: weights, optimizer moments, scheduler, data order and the masking/dropout seeds are all restored
    # (common practice for resumable runs). 12 steps of 4 x accum sequences run past one epoch of the packed
    # corpus, and the resume at step 6 lands mid-epoch.
    common = (f"adapter={kind}", "adapter.num_top_layers=1", f"schedule.grad_accum_steps={accum}",
              "schedule.max_steps=12", "eval.every_steps=5", "checkpoint.save_every_steps=4")
    run(tiny_cfg(tmp_path, tiny_encoder, "straight", *common))
    first = run(tiny_cfg(tmp_path, tiny_encoder, "resumed", *common, "schedule.stop_after_steps=6"))
    assert not first["completed"] and first["step"] == 6
    state = json.loads((tmp_path / "resumed" / "checkpoints" / "step-6" / "state.json").read_text())
    cursor = state["cursor"]
    assert 0 < cursor["position"] < cursor["num_seqs"], "the resume must land mid-epoch"
    second = run(tiny_cfg(tmp_path, tiny_encoder, "resumed", *common))
    assert second["completed"] and second["step"] == 12
    a = load_file(str(tmp_path / "straight" / "final" / "model.safetensors"))
    b = load_file(str(tmp_path / "resumed" / "final" / "model.safetensors"))
    assert a.keys() == b.keys()
    for key in a:
        assert torch.equal(a[key], b[key]), key
    straight, resumed = _train_records(tmp_path / "straight"), _train_records(tmp_path / "resumed")
    assert [r["step"] for r in resumed] == list(range(1, 13)), "each step exactly once"
    assert [r["loss"] for r in straight] == [r["loss"] for r in resumed]
    assert [r.get("heldout_loss_domain") for r in straight] == [r.get("heldout_loss_domain") for r in resumed]
    assert second["end"] == run_result(tmp_path / "straight")["end"]
    last = json.loads((tmp_path / "resumed" / "checkpoints" / "step-12" / "state.json").read_text())
    assert last["cursor"]["epoch"] > cursor["epoch"], "the resumed half must cross an epoch boundary"
    _check_checkpoint_is_a_model_folder(tmp_path / "resumed", "step-8", kind)


def run_result(folder: Path) -> dict:
    return json.loads((folder / "result.json").read_text())


def _check_checkpoint_is_a_model_folder(out: Path, name: str, kind: str) -> None:
    """An intermediate checkpoint loads as a plain model (score and compare take it as an arm); a LoRA one also
    in peft's adapter format on top of the run's base/."""
    from transformers import AutoModelForMaskedLM, AutoTokenizer

    folder = out / "checkpoints" / name
    model, info = AutoModelForMaskedLM.from_pretrained(folder, output_loading_info=True)
    assert not info["missing_keys"] and not info["unexpected_keys"], info
    AutoTokenizer.from_pretrained(folder)
    if kind != "lora":
        return
    from peft import PeftModel

    adapted = PeftModel.from_pretrained(AutoModelForMaskedLM.from_pretrained(out / "base"), folder / "adapter")
    ids = torch.tensor([[2, 40, 41, 42, 43, 3]])
    with torch.no_grad():
        merged_logits = model.eval()(input_ids=ids).logits
        adapter_logits = adapted.eval()(input_ids=ids).logits
    assert torch.allclose(merged_logits, adapter_logits, atol=1e-5)


def test_resume_never_refuses_an_existing_run(tmp_path, tiny_encoder):
    run(tiny_cfg(tmp_path, tiny_encoder, "run", "schedule.stop_after_steps=2"))
    from adapt.common.errors import ConfigError

    with pytest.raises(ConfigError, match="resume=never"):
        run(tiny_cfg(tmp_path, tiny_encoder, "run", "resume=never"))


@pytest.mark.parametrize("kind", ["full", "lora", "embeddings", "top_layers"])
def test_every_adapter_trains_and_exports(tmp_path, tiny_encoder, kind, monkeypatch):
    import adapt.stages.pretrain as stage

    switched, original = [], stage.sparse_tied_embedding_grad  # on exactly where the tied embedding weight trains
    monkeypatch.setattr(stage, "sparse_tied_embedding_grad", lambda model: switched.append(original(model)))
    result = run(tiny_cfg(tmp_path, tiny_encoder, kind, f"adapter={kind}", "adapter.num_top_layers=1"))
    assert switched == [kind in ("full", "embeddings")]
    from transformers import AutoModelForMaskedLM

    model, info = AutoModelForMaskedLM.from_pretrained(tmp_path / kind / "final", output_loading_info=True)
    assert not info["missing_keys"] and not info["unexpected_keys"]
    assert 0 < result["trainable_parameters"] <= result["total_parameters"]


def test_head_warmup_stops_when_the_loss_levels_off(tmp_path, tiny_encoder_headless):
    run(tiny_cfg(tmp_path, tiny_encoder_headless, "run", "head_warmup.max_epochs=40",
                 "head_warmup.min_improvement=0.9", "schedule.stop_after_steps=1"))
    warm = json.loads((tmp_path / "run" / "metrics.jsonl").read_text().splitlines()[0])
    # a 90% held-out improvement per epoch is impossible, so it stops after the second flat epoch, not the first
    assert warm["phase"] == "head_warmup" and warm["converged"] and warm["epochs"] == 2
    assert len(warm["heldout_losses"]) == 3 and len(warm["train_losses"]) == 2
    assert warm["last_loss"] == min(warm["heldout_losses"]) and warm["seconds"] > 0
