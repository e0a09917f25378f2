"""Resuming a pretrain run: the fingerprint refuses changed settings, metrics.jsonl holds every step once, and a
failed save (full disk) leaves the previous checkpoint complete and resumable. Tiny random BERT, in process."""

from __future__ import annotations

import errno
import json
import re
import shutil
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import pytest
import torch
from safetensors.torch import load_file

from adapt.common.errors import ConfigError, InputError
from adapt.common.io import hash_file
from adapt.stages.pretrain import run
from tests.conftest import build_tiny_encoder
from tests.e2e.test_pretrain import tiny_cfg


def _folder_digest(folder: Path) -> dict[str, str]:
    return {str(p.relative_to(folder)): hash_file(p) for p in sorted(folder.rglob("*")) if p.is_file()}


def _records(out: Path) -> list[dict]:
    return [json.loads(line) for line in (out / "metrics.jsonl").read_text().splitlines()]


def _renamed_token_copy(encoder: Path, folder: Path) -> Path:
    """The same weights with one vocabulary entry spelled differently: only the tokenizer differs."""
    shutil.copytree(encoder, folder)
    for name in ("tokenizer.json", "vocab.txt"):
        path = folder / name
        if path.exists():
            path.write_text(path.read_text().replace('"landlord"', '"landlady"').replace("\nlandlord\n",
                                                                                         "\nlandlady\n"))
    return folder


def _changed_corpus_copy(corpus: Path, folder: Path) -> Path:
    shutil.copytree(corpus, folder)
    shard = folder / "train" / "part-00000.parquet"
    table = pq.read_table(shard)
    texts = table.column("text").to_pylist()
    texts[0] = texts[0] + " the tenant paid."
    pq.write_table(table.set_column(table.schema.get_field_index("text"), "text", pa.array(texts)), shard)
    return folder


def test_resume_refuses_every_changed_setting_in_one_line(tmp_path, tiny_encoder):
    base = ("adapter=lora", "adapter.r=4")
    run(tiny_cfg(tmp_path, tiny_encoder, "run", *base, "schedule.stop_after_steps=2"))
    out = tmp_path / "run"
    before = _folder_digest(out)
    other_weights = build_tiny_encoder(tmp_path / "other-encoder", seed=1)
    other_vocab = _renamed_token_copy(tiny_encoder, tmp_path / "other-vocab")
    other_corpus = _changed_corpus_copy(tmp_path / "corpus", tmp_path / "other-corpus")
    cases = {  # override(s) -> keys the refusal must name
        ("masking.rate=0.3", "schedule.learning_rate=1e-4"): ["masking.rate", "schedule.learning_rate"],
        ("encoder.max_seq_len=48",): ["encoder.max_seq_len"],
        ("adapter.r=2",): ["adapter.r"],
        ("adapter=full",): ["adapter.kind"],
        ("seed=1",): ["seed"],
        ("schedule.grad_accum_steps=2",): ["schedule.grad_accum_steps"],
        ("eval.max_heldout_seqs=2",): ["eval.max_heldout_seqs"],
        ("masking.unit=word", "data.order=quality_weighted"): ["masking.unit", "data.order"],
        (f"encoder.name_or_path={other_weights}",): ["encoder.weights_sha256"],
        (f"encoder.name_or_path={other_vocab}",): ["tokenizer.vocab_sha256"],
        (f"corpus_dir={other_corpus}",): ["corpus.train_sha256"],
    }
    for overrides, keys in cases.items():
        message = str(_refusal(tmp_path, tiny_encoder, *base, *overrides))  # later overrides win
        assert "\n" not in message, message
        assert sorted(re.findall(r"([\w.]+): checkpoint ", message)) == sorted(keys), (overrides, message)
        assert "out_dir" in message and "same settings" in message, message
    rate = str(_refusal(tmp_path, tiny_encoder, *base, "masking.rate=0.3"))
    assert "masking.rate: checkpoint 0.15, now 0.3" in rate
    assert _folder_digest(out) == before, "a refused resume must not change the run folder"
    # keys that may change on resume (and an identical corpus in another folder) are accepted
    moved_corpus = shutil.copytree(tmp_path / "corpus", tmp_path / "moved-corpus")
    cfg = tiny_cfg(tmp_path, tiny_encoder, "run", *base, "eval.every_steps=1", "checkpoint.keep_last=3",
                   "checkpoint.save_every_steps=1", "adapter.num_top_layers=1", f"corpus_dir={moved_corpus}")
    assert run(cfg)["completed"]


def _refusal(tmp_path: Path, encoder: Path, *overrides: str) -> ConfigError:
    with pytest.raises(ConfigError) as err:
        run(tiny_cfg(tmp_path, encoder, "run", *overrides))
    return err.value


def test_metrics_hold_each_step_once_after_an_interrupted_session(tmp_path, tiny_encoder):
    run(tiny_cfg(tmp_path, tiny_encoder, "run", "schedule.stop_after_steps=2"))
    out = tmp_path / "run"
    step2 = next(r for r in _records(out) if r["phase"] == "train" and r["step"] == 2)
    # what a session killed after step 3, before its next checkpoint, leaves: the line of step 3 and a torn one
    with open(out / "metrics.jsonl", "a", encoding="utf-8") as fh:
        fh.write(json.dumps({**step2, "step": 3}) + "\n" + '{"time": "2026-01-01T00:0')
    assert run(tiny_cfg(tmp_path, tiny_encoder, "run"))["completed"]
    records = _records(out)
    assert [r["step"] for r in records if r["phase"] == "train"] == [1, 2, 3, 4]
    phases = [r["phase"] for r in records]
    assert phases.count("start") == 1 and phases.count("end") == 1 and phases[-1] == "end"


def test_resume_falls_back_past_a_damaged_checkpoint_and_refuses_when_none_is_usable(tmp_path, tiny_encoder):
    run(tiny_cfg(tmp_path, tiny_encoder, "straight"))
    run(tiny_cfg(tmp_path, tiny_encoder, "run", "checkpoint.save_every_steps=1", "schedule.stop_after_steps=3"))
    ckpts = tmp_path / "run" / "checkpoints"
    index = json.loads((ckpts / "index.json").read_text())["checkpoints"]
    assert [e["step"] for e in index] == [2, 3]
    weights = ckpts / "step-3" / "model.safetensors"
    weights.write_bytes(weights.read_bytes()[:-100])  # a torn file in the newest checkpoint
    result = run(tiny_cfg(tmp_path, tiny_encoder, "run"))
    assert result["completed"] and result["step"] == 4
    a = load_file(str(tmp_path / "straight" / "final" / "model.safetensors"))
    b = load_file(str(tmp_path / "run" / "final" / "model.safetensors"))
    assert all(torch.equal(a[k], b[k]) for k in a), "the run resumed from step 2 must end where a straight run ends"
    assert [r["step"] for r in _records(tmp_path / "run") if r["phase"] == "train"] == [1, 2, 3, 4]
    # every checkpoint damaged, trained steps on record: refuse rather than start again from step 0
    for entry in json.loads((ckpts / "index.json").read_text())["checkpoints"]:
        (ckpts / entry["folder"] / "optimizer.pt").write_bytes(b"")
    with pytest.raises(InputError) as err:
        run(tiny_cfg(tmp_path, tiny_encoder, "run", "schedule.max_steps=6"))
    message = str(err.value)
    assert "\n" not in message and "no usable checkpoint" in message and "optimizer.pt" in message, message


def test_a_full_disk_during_a_save_leaves_the_previous_checkpoint_intact(tmp_path, tiny_encoder, monkeypatch):
    run(tiny_cfg(tmp_path, tiny_encoder, "run", "schedule.stop_after_steps=2"))
    ckpts = tmp_path / "run" / "checkpoints"
    before = _folder_digest(ckpts / "step-2")
    index_before = (ckpts / "index.json").read_bytes()
    real_save = torch.save

    def full_disk(obj, f, *args, **kwargs):  # half a file, then the device is full
        Path(f).write_bytes(b"\0" * 64)
        raise OSError(errno.ENOSPC, "No space left on device", str(f))

    monkeypatch.setattr(torch, "save", full_disk)
    with pytest.raises(InputError) as err:
        run(tiny_cfg(tmp_path, tiny_encoder, "run"))
    message = str(err.value)
    assert "\n" not in message and "No space left on device" in message and "step-2" in message, message
    monkeypatch.setattr(torch, "save", real_save)
    assert _folder_digest(ckpts / "step-2") == before
    assert (ckpts / "index.json").read_bytes() == index_before
    assert not [p for p in ckpts.iterdir() if p.name.startswith(".")], "no half-written folder is left behind"
    result = run(tiny_cfg(tmp_path, tiny_encoder, "run"))
    assert result["completed"] and result["step"] == 4
