"""The pretrain job tokenises a corpus once: a resumed run, or another run sharing data.cache_dir, maps the
token cache instead."""

from __future__ import annotations

import logging

from transformers import PreTrainedTokenizerBase

from adapt.stages.pretrain import run
from tests.e2e.test_pretrain import tiny_cfg

CACHE_LOGGER = "adapt.training.token_cache"


def _refuse_tokenising(monkeypatch) -> None:
    def boom(*args, **kwargs):
        raise AssertionError("the tokenizer ran although the token cache was complete")

    monkeypatch.setattr(PreTrainedTokenizerBase, "__call__", boom)


def test_resume_maps_the_cache_without_tokenising(tmp_path, tiny_encoder, monkeypatch, caplog):
    first = run(tiny_cfg(tmp_path, tiny_encoder, "run", "schedule.stop_after_steps=2"))
    assert not first["completed"]
    cache = tmp_path / "run" / "token_cache"
    assert sorted(p.name.split("-")[0] for p in cache.iterdir()) == ["heldout", "train"]
    _refuse_tokenising(monkeypatch)
    with caplog.at_level(logging.INFO, logger=CACHE_LOGGER):
        second = run(tiny_cfg(tmp_path, tiny_encoder, "run"))
    assert second["completed"] and second["step"] == 4
    assert caplog.text.count("not tokenising again") == 2  # train and heldout


def test_runs_sharing_a_cache_dir_tokenise_once(tmp_path, tiny_encoder, monkeypatch, caplog):
    shared = tmp_path / "shared-cache"
    run(tiny_cfg(tmp_path, tiny_encoder, "a", f"data.cache_dir={shared}", "schedule.stop_after_steps=1"))
    assert len(list(shared.iterdir())) == 2 and not (tmp_path / "a" / "token_cache").exists()
    _refuse_tokenising(monkeypatch)
    with caplog.at_level(logging.INFO, logger=CACHE_LOGGER):
        result = run(tiny_cfg(tmp_path, tiny_encoder, "b", f"data.cache_dir={shared}", "head_warmup.when=never",
                              "schedule.stop_after_steps=1"))
    assert result["step"] == 1 and caplog.text.count("not tokenising again") == 2
