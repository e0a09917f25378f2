"""The data path of the pretrain loop on a tiny random BERT: the quality orders (data.order), whole-word
masking (masking.unit=word) and general-text replay (replay.share), each through the real loop, and resumed bit
for bit. Rows are counted where the loop takes them: BatchCursor.next_indices, wrapped."""

from __future__ import annotations

import json
import random
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
import torch
from safetensors.torch import load_file

from adapt.common.errors import ConfigError, InputError
from adapt.config import compose_job
from adapt.stages.pretrain import run
from adapt.training.packing import BatchCursor
from tests.e2e.test_pretrain import tiny_cfg

# in the tiny vocabulary, and outside it (cut into letter pieces: words of several tokens)
KNOWN = "the court tenant landlord notice contract clause appeal rent months of and to a in".split()
UNKNOWN = "quartz lease ledger notary verdict bailiff escrow".split()
GENERAL = "river garden window kitchen music morning bicycle library".split()
REPLAY_SALT = 0x4E91A  # the replay cursor's salt in adapt.training.run_data.batch_cursors


def write_scored(folder: Path, words: list[str], n_train: int, seed: int) -> Path:
    """A prepared corpus with the quality column adapt-prepare writes (scores uniform in [0, 1])."""
    rng = random.Random(seed)
    for split, n in (("train", n_train), ("heldout", 12)):
        texts = [" ".join(rng.choice(words) for _ in range(rng.randint(15, 40))) + "." for _ in range(n)]
        (folder / split).mkdir(parents=True, exist_ok=True)
        pq.write_table(pa.table({"id": [f"{split}-{i}" for i in range(n)], "text": texts,
                                 "quality": pa.array([rng.random() for _ in range(n)], pa.float32())}),
                       folder / split / "part-00000.parquet")
    return folder


def _cfg(tmp_path: Path, encoder: Path, out: str, *extra: str):
    corpus = tmp_path / "scored"
    if not corpus.exists():
        write_scored(corpus, KNOWN + UNKNOWN, 160, seed=0)
    return tiny_cfg(tmp_path, encoder, out, f"corpus_dir={corpus}", "head_warmup.when=never", *extra)


def _general(tmp_path: Path) -> str:
    folder = tmp_path / "general"
    if not folder.exists():
        write_scored(folder, GENERAL + KNOWN[:4], 60, seed=1)
    return f"general_dir={folder}"


@pytest.fixture
def taken(monkeypatch):
    """(salt, quality of each row taken, rows) per call of next_indices, in the order the loop made them; and
    the scores of every sequence per cursor salt under the key "corpus"."""
    calls: list = []
    corpus: dict[int, np.ndarray] = {}
    original = BatchCursor.next_indices

    def spy(self, count=None):
        idx = original(self, count)
        if self._quality is not None:
            corpus[self.salt] = self._quality.numpy()
        quality = self._quality[idx].numpy() if self._quality is not None else np.full(len(idx), np.nan)
        calls.append((self.salt, quality, len(idx)))
        return idx

    monkeypatch.setattr(BatchCursor, "next_indices", spy)
    return {"calls": calls, "corpus": corpus}


@pytest.mark.parametrize("order", ["shuffled", "quality_desc", "quality_weighted"])
def test_each_order_shapes_the_scores_the_loop_sees(tmp_path, tiny_encoder, taken, order):
    steps = 47  # 188 rows: one epoch of the 190 packed sequences (160 documents)
    run(_cfg(tmp_path, tiny_encoder, order, f"data.order={order}", "data.window_batches=2",
             "data.quality_floor=0.3", f"schedule.max_steps={steps}", "eval.every_steps=0",
             "checkpoint.save_every_steps=0"))
    per_step = np.stack([q for _, q, _ in taken["calls"]])  # (steps, batch): one micro-batch a step
    scores = next(iter(taken["corpus"].values()))  # every packed sequence's score
    k = steps // 10
    first, last = per_step[:k].mean(), per_step[-k:].mean()
    # with no trend, each tenth is a sample of k x batch scores: its mean has sd ~ std / sqrt(k x batch), the
    # difference of two such means sqrt(2) times that; 4 sd bound a chance difference (common practice)
    noise = 4 * scores.std() * np.sqrt(2 / (k * per_step.shape[1]))
    print(f"{order}: first tenth {first:.3f}, last tenth {last:.3f}, all {per_step.mean():.3f}, "
          f"corpus {scores.mean():.3f}, chance bound {noise:.3f}")
    if order == "quality_desc":
        top = np.sort(scores)[::-1]
        assert first == pytest.approx(top[: k * 4].mean()), "the first tenth is the best-scored sequences"
        assert first - last > 0.5, (first, last)
    elif order == "shuffled":
        assert abs(first - last) < noise, (first, last, noise)
    else:  # no curriculum (the same weights at every step), but the draws lean to high scores
        assert abs(first - last) < noise, (first, last, noise)
        w = np.clip(scores, 0.3, 1.0)
        assert abs(per_step.mean() - (w * scores).sum() / w.sum()) < 4 * scores.std() / np.sqrt(per_step.size)
        assert (per_step < 0.3).any(), "sequences under the floor are still drawn"


def test_replay_share_holds_through_the_loop_and_both_heldout_figures_are_logged(tmp_path, tiny_encoder, taken):
    steps, batch, share = 25, 4, 0.3
    result = run(_cfg(tmp_path, tiny_encoder, "replay", _general(tmp_path), f"replay.share={share}",
                      f"schedule.max_steps={steps}", "eval.every_steps=5", "checkpoint.save_every_steps=0"))
    assert result["completed"]
    replay = sum(n for salt, _, n in taken["calls"] if salt == REPLAY_SALT)
    domain = sum(n for salt, _, n in taken["calls"] if salt != REPLAY_SALT)
    assert replay + domain == steps * batch, "every batch keeps batch_size rows"
    # the realised share is within one row of share x rows (adapt.training.packing.replay_rows)
    assert abs(replay - share * steps * batch) <= 1, (replay, domain)
    records = [json.loads(line) for line in (tmp_path / "replay" / "metrics.jsonl").read_text().splitlines()]
    eval_steps = {name: [r["step"] for r in records if r.get(f"heldout_loss_{name}") is not None]
                  for name in ("domain", "general")}
    assert eval_steps["domain"] == eval_steps["general"] and len(eval_steps["domain"]) >= 4, eval_steps


RESUME_CASES = [("data.order=quality_desc", "masking.unit=word"),
                ("data.order=quality_weighted", "replay.share=0.25", "masking.unit=word")]


@pytest.mark.parametrize("case", RESUME_CASES, ids=["quality_desc-word", "quality_weighted-word-replay"])
def test_the_new_options_resume_bit_for_bit(tmp_path, tiny_encoder, case):
    # 8 steps = 4 + resume + 4 (common practice for resumable runs; as tests/e2e/test_pretrain.py does for the
    # default options): the domain and replay orders and the word masks continue exactly
    common = (_general(tmp_path), *case, "data.window_batches=2", "schedule.max_steps=8", "eval.every_steps=3",
              "checkpoint.save_every_steps=0")
    run(_cfg(tmp_path, tiny_encoder, "straight", *common))
    first = run(_cfg(tmp_path, tiny_encoder, "resumed", *common, "schedule.stop_after_steps=4"))
    assert not first["completed"] and first["step"] == 4
    state = json.loads((tmp_path / "resumed" / "checkpoints" / "step-4" / "state.json").read_text())
    assert state["cursor"]["order"] == case[0].split("=")[1] and state["cursor"]["position"] > 0
    if "replay.share=0.25" in case:
        assert state["replay_cursor"]["position"] > 0
    assert run(_cfg(tmp_path, tiny_encoder, "resumed", *common))["completed"]
    a = load_file(str(tmp_path / "straight" / "final" / "model.safetensors"))
    b = load_file(str(tmp_path / "resumed" / "final" / "model.safetensors"))
    assert all(torch.equal(a[k], b[k]) for k in a)
    losses = [[r.get("loss") for r in map(json.loads, (tmp_path / f / "metrics.jsonl").read_text().splitlines())
               if r["phase"] == "train"] for f in ("straight", "resumed")]
    assert losses[0] == losses[1] and len(losses[0]) == 8


def test_word_masking_changes_what_is_trained(tmp_path, tiny_encoder):
    common = ("schedule.max_steps=2", "eval.every_steps=0", "checkpoint.save_every_steps=0")
    token = run(_cfg(tmp_path, tiny_encoder, "token", *common))
    word = run(_cfg(tmp_path, tiny_encoder, "word", *common, "masking.unit=word"))
    assert token["end"]["heldout_loss_domain"] != word["end"]["heldout_loss_domain"]


def test_quality_orders_refuse_a_corpus_without_scores(tmp_path, tiny_encoder):
    with pytest.raises(InputError, match="data.order=quality_desc needs the quality score") as err:
        run(tiny_cfg(tmp_path, tiny_encoder, "run", "data.order=quality_desc"))  # the corpus has no quality
    assert "\n" not in str(err.value)


@pytest.mark.parametrize("override,key", [
    ("replay.share=0.6", "replay.share=0.6 is outside"), ("replay.share=0.1", "needs general_dir"),
    ("data.order=best_first", "data.order='best_first'"), ("data.quality_floor=0", "data.quality_floor=0"),
    ("data.window_batches=0", "data.window_batches=0"), ("masking.unit=span", "masking.unit='span'")])
def test_new_keys_are_validated_in_one_line(tmp_path, override, key):
    with pytest.raises(ConfigError, match=key.replace(".", r"\.").replace("(", r"\(")) as err:
        compose_job("pretrain", [f"corpus_dir={tmp_path}", override])
    assert "\n" not in str(err.value)


def test_the_demo_takes_each_option_by_an_override():
    cfg = compose_job("demo", ["pretrain.data.order=quality_weighted", "pretrain.data.quality_floor=0.2",
                               "pretrain.masking.unit=word", "pretrain.replay.share=0.1"])
    assert (cfg.pretrain.data.order, cfg.pretrain.data.quality_floor) == ("quality_weighted", 0.2)
    assert cfg.pretrain.masking.unit == "word" and cfg.pretrain.replay.share == 0.1
    assert cfg.pretrain.general_dir, "the demo prepares the general corpus replay draws from"


def test_a_changed_replay_corpus_is_refused_on_resume(tmp_path, tiny_encoder):
    common = (_general(tmp_path), "replay.share=0.25", "eval.every_steps=0")
    run(_cfg(tmp_path, tiny_encoder, "run", *common, "schedule.stop_after_steps=1"))
    shard = tmp_path / "general" / "train" / "part-00000.parquet"
    table = pq.read_table(shard)
    texts = table.column("text").to_pylist()
    pq.write_table(table.set_column(table.schema.get_field_index("text"), "text",
                                    pa.array(["a new first line."] + texts[1:])), shard)
    with pytest.raises(ConfigError, match=r"general\.train_sha256: checkpoint "):
        run(_cfg(tmp_path, tiny_encoder, "run", *common))
