"""The vocab job end to end on a tiny BERT: prepared corpus -> extended encoder -> pretrain from it; and its
one-line refusals through the console script."""

from __future__ import annotations

import json
import random
import subprocess
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import pytest
import torch
from transformers import AutoModelForMaskedLM, AutoTokenizer

from adapt.common.io import hash_file
from adapt.config import compose_job
from adapt.config.report import ReportJob
from adapt.reporting.values import fmt
from adapt.stages import pretrain, vocab
from adapt.stages import report as report_stage
from tests.conftest import start_console

COMMON = "the court tenant landlord notice contract clause appeal judgment of and to a in is was for on by".split()
DOMAIN = ["lessee", "arrears", "surety", "estoppel"]
NAME = "ostergaard"  # a name in one document only: must stay out of the vocabulary


def write_corpus(folder: Path, seed: int = 0) -> Path:
    rng = random.Random(seed)
    for split, n in (("train", 40), ("heldout", 8)):
        texts = []
        for i in range(n):
            words = [rng.choice(COMMON + DOMAIN) for _ in range(rng.randint(20, 40))]
            if split == "train" and i == 3:
                words += [NAME] * 6
            texts.append(" ".join(words) + ".")
        (folder / split).mkdir(parents=True, exist_ok=True)
        pq.write_table(pa.table({"id": [f"{split}-{i}" for i in range(n)], "text": texts}),
                       folder / split / "part-00000.parquet")
    return folder


def _cfg(corpus: Path, encoder: Path, out: Path, *extra: str):
    return compose_job("vocab", [f"corpus={corpus}", f"out_dir={out}", f"encoder.name_or_path={encoder}",
                                 "words.min_count=3", "words.min_docs=2", "runtime.progress=false",
                                 "runtime.num_threads=1", *extra])


def report_figures(f: dict) -> str:
    return f"| heldout | {f['docs']} | {fmt(f['fertility_before'])} | {fmt(f['fertility_after'])} |"


def _files(folder: Path) -> dict[str, str]:
    return {str(p): hash_file(p) for p in sorted(folder.rglob("*")) if p.is_file()}


def test_vocab_job_extends_a_headless_encoder_and_pretrain_trains_it(tmp_path, tiny_encoder_headless):
    corpus = write_corpus(tmp_path / "corpus")
    inputs = {**_files(corpus), **_files(tiny_encoder_headless)}
    out = tmp_path / "vocab"
    result = vocab.run(_cfg(corpus, tiny_encoder_headless, out))
    assert _files(corpus) | _files(tiny_encoder_headless) == inputs, "no input file may change"

    report = json.loads((out / "vocab_report.json").read_text())
    added = [w["word"] for w in report["added"]]
    assert set(DOMAIN) <= set(added) and NAME not in added
    assert report["left_out"]["min_docs"] >= 1 and report["left_out"]["passed"] == len(added)
    assert report["added_count"] == len(added) == report["vocab_size"] - report["base_vocab_size"]
    assert json.loads((out / "manifest.json").read_text())["status"] == "completed"
    assert result["summary"][-1].startswith("The added words")

    base = AutoTokenizer.from_pretrained(tiny_encoder_headless)
    extended = AutoTokenizer.from_pretrained(out / "model")
    assert len(extended) == report["vocab_size"]
    texts = pq.read_table(corpus / "heldout" / "part-00000.parquet").column("text").to_pylist()
    before = sum(len(base(t, add_special_tokens=False)["input_ids"]) for t in texts)
    after = sum(len(extended(t, add_special_tokens=False)["input_ids"]) for t in texts)
    fert = report["fertility"]["heldout"]
    assert (fert["tokens_before"], fert["tokens_after"]) == (before, after) and after < before
    assert fert["tokens_saved_share"] == pytest.approx(1 - after / before)
    assert fert["fertility_after"] < fert["fertility_before"]

    # the head was not in the checkpoint, so it is not written: pretrain must still see it missing
    model, info = AutoModelForMaskedLM.from_pretrained(out / "model", output_loading_info=True)
    assert any(k.startswith("cls.") for k in info["missing_keys"])
    assert model.config.vocab_size == report["vocab_size"]

    page = report_stage.run(ReportJob(vocab_dir=str(out), out_dir=str(tmp_path / "report")))
    md = Path(page["markdown"]).read_text(encoding="utf-8")
    assert "Vocabulary extension" in md and "vocab_dir" not in page["missing"]
    assert f"{report_figures(fert)}" in md  # the heldout row carries vocab_report.json's own figures
    assert all(f"| {w} |" in md for w in added[:5])

    run = pretrain.run(compose_job("pretrain", [
        f"corpus_dir={corpus}", f"out_dir={tmp_path / 'run'}", "debug=tiny", f"encoder.name_or_path={out}",
        "encoder.random_init=false", "runtime.progress=false", "runtime.num_threads=1", "eval.pppl_max_tokens=0"]))
    assert run["completed"] and run["head_missing"]
    final = AutoTokenizer.from_pretrained(tmp_path / "run" / "final")
    assert final.get_vocab() == extended.get_vocab()


def test_a_head_in_the_checkpoint_is_kept_and_grown(tmp_path, tiny_encoder):
    corpus = write_corpus(tmp_path / "corpus")
    out = tmp_path / "vocab"
    report = vocab.run(_cfg(corpus, tiny_encoder, out, "words.max_new_tokens=2"))
    assert report["added_count"] == 2
    model, info = AutoModelForMaskedLM.from_pretrained(out / "model", output_loading_info=True)
    assert not info["missing_keys"]
    old = AutoModelForMaskedLM.from_pretrained(tiny_encoder)
    n = old.config.vocab_size
    assert torch.equal(model.cls.predictions.bias[:n], old.cls.predictions.bias)
    # the new ids follow the tokenizer's last id; rows the matrix already had past it are reused
    assert model.cls.predictions.bias.shape[0] == max(n, report["vocab_size"])


def _cli(args: list[str], cwd: Path) -> subprocess.Popen:
    return start_console("adapt-vocab", args, cwd)


@pytest.mark.slow
def test_console_script_refuses_in_one_line(tmp_path, tiny_encoder):
    corpus = write_corpus(tmp_path / "corpus")
    common = [f"encoder.name_or_path={tiny_encoder}", "runtime.progress=false"]
    missing = _cli([f"corpus={tmp_path / 'nowhere'}", f"out_dir={tmp_path / 'a'}", *common], tmp_path)
    strict = _cli([f"corpus={corpus}", f"out_dir={tmp_path / 'b'}", "words.min_docs=1000", *common], tmp_path)
    for proc, needle in ((missing, "nowhere"), (strict, "lower words.min_count or words.min_docs")):
        _, err = proc.communicate(timeout=180)
        errors = [ln for ln in err.splitlines() if ln.startswith("error:")]
        assert proc.returncode == 2 and len(errors) == 1 and needle in errors[0], err
        assert "Traceback" not in err
