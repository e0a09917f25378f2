"""Early stopping, the best checkpoint (kept out of rotation, exported as best/), the model cards and the
TensorBoard event files, through the real pretrain loop on the tiny random BERT."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
import torch
from safetensors.torch import load_file

from adapt.common.errors import ConfigError
from adapt.config import compose_job
from adapt.stages.pretrain import run
from tests.e2e.test_pretrain import tiny_cfg

# min_improvement far above any fall of the loss: only the first evaluation counts as an improvement, so the best
# step is the first evaluated one (2) and patience 2 stops the run at the second evaluation after it (6)
CONSTRUCTED = ("schedule.max_steps=12", "eval.every_steps=2", "early_stop.patience=2",
               "early_stop.min_improvement=100", "checkpoint.save_every_steps=1", "checkpoint.keep_last=1")


def _records(out: Path, phase: str = "train") -> list[dict]:
    return [r for r in map(json.loads, (out / "metrics.jsonl").read_text().splitlines()) if r["phase"] == phase]


def _same_weights(a: Path, b: Path) -> bool:
    x, y = load_file(str(a / "model.safetensors")), load_file(str(b / "model.safetensors"))
    return x.keys() == y.keys() and all(torch.equal(x[k], y[k]) for k in x)


def _front_matter(card: Path) -> tuple[dict, str]:
    yaml = pytest.importorskip("yaml")
    text = card.read_text(encoding="utf-8")
    assert text.startswith("---\n")
    head, body = text[4:].split("\n---\n", 1)
    return yaml.safe_load(head), body


def test_early_stop_ends_a_complete_run_and_best_holds_the_best_steps_weights(tmp_path, tiny_encoder):
    result = run(tiny_cfg(tmp_path, tiny_encoder, "run", *CONSTRUCTED, "card.license=apache-2.0"))
    out = tmp_path / "run"
    assert result["completed"] and result["stopped_by"] == "early_stop" and result["step"] == 6
    assert [r["step"] for r in _records(out)] == list(range(1, 7))
    assert result["best"]["step"] == 2
    ckpts = out / "checkpoints"
    # rotation (keep_last=1, a save every step) kept the newest checkpoint and the best one, nothing else
    assert sorted(p.name for p in ckpts.iterdir() if p.is_dir()) == ["step-2", "step-6"]
    index = json.loads((ckpts / "index.json").read_text())
    assert index["best"] == {"step": 2, "folder": "step-2"}
    assert _same_weights(out / "best", ckpts / "step-2")
    assert _same_weights(out / "final", ckpts / "step-6") and not _same_weights(out / "best", out / "final")
    from transformers import AutoModelForMaskedLM

    _, info = AutoModelForMaskedLM.from_pretrained(out / "best", output_loading_info=True)
    assert not info["missing_keys"] and not info["unexpected_keys"]
    assert not (out / "best" / "optimizer.pt").exists()
    on_disk = json.loads((out / "result.json").read_text())
    assert on_disk["best"]["step"] == 2 and on_disk["stopped_by"] == "early_stop"
    recorded = next(r for r in _records(out) if r["step"] == 2)["heldout_loss_domain"]
    assert on_disk["best"]["heldout"]["heldout_loss_domain"] == recorded
    assert json.loads((out / "manifest.json").read_text())["status"] == "completed"
    assert any("stopped early" in line for line in result["summary"])


def test_the_model_cards_carry_front_matter_and_the_results_figures(tmp_path, tiny_encoder):
    result = run(tiny_cfg(tmp_path, tiny_encoder, "run", *CONSTRUCTED, "card.license=apache-2.0"))
    out = tmp_path / "run"
    for which in ("base", "final", "best"):
        meta, body = _front_matter(out / which / "README.md")
        # Hugging Face model card metadata keys (huggingface.co/docs/hub/model-cards, "Model card metadata")
        assert meta["library_name"] == "transformers" and meta["pipeline_tag"] == "fill-mask"
        assert meta["license"] == "apache-2.0" and "fill-mask" in meta["tags"]
        assert "base_model" not in meta  # a local folder is no hub id
        assert "not legal or medical advice" in body and "governance" in body
        base_row = f"| heldout_loss_domain | {result['start']['heldout_loss_domain']:.4g} |"
        assert base_row in body
    _, final = _front_matter(out / "final" / "README.md")
    assert f"optimizer steps: {result['step']} of" in final and f"tokens seen: {result['tokens_seen']:,}" in final
    assert f"effective batch: {result['effective_batch_size']} sequences (batch 4 × accumulation 1 × 1 " in final
    assert f"| {result['end']['heldout_loss_domain']:.4g} |" in final
    assert f"precision: {result['precision']}" in final
    assert "unit token" in final and "data order: shuffled; general-text replay share: 0.0" in final
    _, best = _front_matter(out / "best" / "README.md")
    assert "best (step 2) |" in best and f"{result['best']['heldout']['heldout_loss_domain']:.4g} |" in best
    unknown, _ = _front_matter(_run_default_card(tmp_path, tiny_encoder))
    assert unknown["license"] == "unknown"


def _run_default_card(tmp_path: Path, encoder: Path) -> Path:
    run(tiny_cfg(tmp_path, encoder, "plain", "schedule.max_steps=2"))
    return tmp_path / "plain" / "final" / "README.md"


def test_best_step_is_the_lowest_evaluated_loss(tmp_path, tiny_encoder):
    # without early stopping and with min_improvement 0, the best step is the argmin of the recorded evaluations
    result = run(tiny_cfg(tmp_path, tiny_encoder, "run", "schedule.max_steps=9", "eval.every_steps=2",
                          "checkpoint.keep_best=true", "checkpoint.keep_last=1"))
    evals = [r for r in _records(tmp_path / "run") if "heldout_loss_domain" in r]
    assert [r["step"] for r in evals] == [2, 4, 6, 8, 9], "the last step is evaluated while the best is tracked"
    lowest = min(evals, key=lambda r: r["heldout_loss_domain"])
    assert result["best"]["step"] == lowest["step"] and result["stopped_by"] is None and result["step"] == 9
    assert _same_weights(tmp_path / "run" / "best", tmp_path / "run" / "checkpoints" / f"step-{lowest['step']}")


def test_resume_mid_run_makes_the_same_early_stop_decisions(tmp_path, tiny_encoder):
    run(tiny_cfg(tmp_path, tiny_encoder, "straight", *CONSTRUCTED))
    # stopped after the best step (2) and one evaluation without improvement (4): a resume that lost the saved
    # count would stop at 8, one that lost the best loss would make 6 the best step
    first = run(tiny_cfg(tmp_path, tiny_encoder, "resumed", *CONSTRUCTED, "schedule.stop_after_steps=4"))
    assert not first["completed"] and first["step"] == 4
    state = json.loads((tmp_path / "resumed" / "checkpoints" / "step-4" / "state.json").read_text())
    assert state["early_stop"]["best_step"] == 2 and state["early_stop"]["evals_since_best"] == 1
    second = run(tiny_cfg(tmp_path, tiny_encoder, "resumed", *CONSTRUCTED))
    assert second["stopped_by"] == "early_stop" and second["step"] == 6 and second["best"]["step"] == 2
    straight, resumed = tmp_path / "straight", tmp_path / "resumed"
    assert [r["loss"] for r in _records(straight)] == [r["loss"] for r in _records(resumed)]
    for folder in ("best", "final"):  # bit for bit
        assert _same_weights(straight / folder, resumed / folder), folder
    again = run(tiny_cfg(tmp_path, tiny_encoder, "resumed", *CONSTRUCTED))  # its patience is spent: no more steps
    assert again["step"] == 6 and again["stopped_by"] == "early_stop"


def test_tensorboard_event_files_hold_the_logged_scalars(tmp_path, tiny_encoder):
    pytest.importorskip("tensorboard")
    from tensorboard.backend.event_processing.event_accumulator import EventAccumulator

    run(tiny_cfg(tmp_path, tiny_encoder, "run", "schedule.max_steps=4", "eval.every_steps=2"))
    out = tmp_path / "run"
    events = EventAccumulator(str(out / "tensorboard"))
    events.Reload()
    tags = set(events.Tags()["scalars"])
    assert {"train/loss", "train/learning_rate", "train/heldout_loss_domain", "start/heldout_loss_domain",
            "end/heldout_loss_domain"} <= tags
    train = _records(out)
    logged = [(e.step, e.value) for e in events.Scalars("train/loss")]
    assert [s for s, _ in logged] == [r["step"] for r in train]
    assert [v for _, v in logged] == pytest.approx([r["loss"] for r in train], rel=1e-6)  # stored as float32


@pytest.mark.parametrize("override,key", [
    ("early_stop.patience=0", "early_stop.patience=0"), ("early_stop.min_improvement=-1", "early_stop.min_improvement"),
    ("checkpoint.keep_best=true eval.every_steps=0", "eval.every_steps=0")])
def test_early_stop_keys_are_validated_in_one_line(tmp_path, override, key):
    with pytest.raises(ConfigError, match=key.replace(".", r"\.")) as err:
        compose_job("pretrain", [f"corpus_dir={tmp_path}", *override.split()])
    assert "\n" not in str(err.value)
