"""The score job end to end on the tiny random BERT: composed config -> run -> scores.json + manifest.json,
and once through the console script (success, and the one-line refusal of an untrained MLM head)."""

from __future__ import annotations

import json
import math
import re
import subprocess
from pathlib import Path

import pytest

from adapt.config import compose_job
from adapt.common.errors import ConfigError, InputError
from adapt.common.io import hash_file
from adapt.stages.score import run
from tests.conftest import start_console

DOCS = [
    "The tenant gave notice to the landlord in March.",
    "The court dismissed the appeal; the judgment stands.",
    "Patient moved to ward 4 and the nurse reduced the dose.",
    "Rent of 1200 for six months was claimed under clause 7.",
    "The scan report was sent to the ward on Monday.",
    "A claim for rent arrears was made by the landlord.",
    "The contract clause on notice is void.",
    "Nurse checked the dose twice before the scan.",
    "Judgment was given for the tenant with costs.",
    "The appeal was lodged within months of the judgment.",
    "Report of the ward round: patient stable.",
    "The landlord and the tenant signed the contract.",
]


def _texts(tmp_path: Path) -> Path:
    path = tmp_path / "texts.jsonl"
    path.write_text("".join(json.dumps({"id": f"d{i}", "text": t}) + "\n" for i, t in enumerate(DOCS)),
                    encoding="utf-8")
    return path


def _overrides(encoder: Path, texts: Path, out: Path, *extra: str) -> list[str]:
    return [f"encoder.name_or_path={encoder}", "encoder.max_seq_len=32", f"texts={texts}", f"out_dir={out}",
            "runtime.progress=false", "runtime.num_threads=1", "batch_size=16", "ci.bootstrap_resamples=300", *extra]


def test_score_job_writes_consistent_scores(tiny_encoder, tmp_path):
    texts = _texts(tmp_path)
    before = hash_file(texts)
    result = run(compose_job("score", _overrides(tiny_encoder, texts, tmp_path / "out")))
    scores = json.loads((tmp_path / "out" / "scores.json").read_text())
    docs = scores["per_document"]
    assert scores["n_docs"] == len(DOCS) == len(docs)
    assert scores["total_tokens"] == sum(d["tokens"] for d in docs)
    # pseudo-perplexity = exp(-ΣPLL / Σ tokens) over the whole set (Salazar et al. 2020, §2.3)
    assert scores["pseudo_perplexity"] == pytest.approx(
        math.exp(-sum(d["pll"] for d in docs) / scores["total_tokens"]), rel=1e-9)
    ci = scores["ci"]
    assert ci["confidence"] == 0.95 and ci["bootstrap_resamples"] == 300
    assert ci["low"] < scores["pseudo_perplexity"] < ci["high"]
    assert re.fullmatch(r"[0-9a-f]{64}", scores["tokenizer_vocab_sha256"])
    assert scores["variant"] == "token" and scores["tokens_per_second"] > 0
    manifest = json.loads((tmp_path / "out" / "manifest.json").read_text())
    assert manifest["job"] == "score" and manifest["status"] == "completed"
    assert manifest["inputs"][str(texts)] == before == hash_file(texts)  # input recorded, not modified
    assert re.match(r"pseudo-perplexity [\d,.]+ \(95% CI [\d,.]+–[\d,.]+\) on [\d,]+ tokens of 12 documents",
                    result["summary"][0])


def test_limits_are_seeded_and_the_token_budget_is_exact(tiny_encoder, tmp_path):
    texts = _texts(tmp_path)

    def score(name, seed, variant="token"):
        run(compose_job("score", _overrides(tiny_encoder, texts, tmp_path / name, "max_docs=6", "max_tokens=40",
                                            f"seed={seed}", f"variant={variant}")))
        return json.loads((tmp_path / name / "scores.json").read_text())

    a, b, c = score("a", 0), score("b", 0), score("c", 1)
    assert a["total_tokens"] == 40 and a["n_docs"] <= 6
    assert [d["cut"] for d in a["per_document"]][-1] is True
    assert a["per_document"] == b["per_document"]  # same seed, same documents and figures
    assert [d["id"] for d in a["per_document"]] != [d["id"] for d in c["per_document"]]
    l2r = score("l2r", 0, "word_l2r")
    assert l2r["variant"] == "word_l2r" and l2r["total_tokens"] == 40
    assert l2r["tokenizer_vocab_sha256"] == a["tokenizer_vocab_sha256"]


def test_untrained_head_is_refused_unless_allowed(tiny_encoder_headless, tmp_path):
    texts = _texts(tmp_path)
    cfg = compose_job("score", _overrides(tiny_encoder_headless, texts, tmp_path / "out"))
    with pytest.raises(InputError, match="allow_untrained_head=true") as err:
        run(cfg)
    assert "base/" in str(err.value) and not (tmp_path / "out" / "scores.json").exists()
    first, again = (run(compose_job("score", _overrides(tiny_encoder_headless, texts, tmp_path / name,
                                                        "allow_untrained_head=true"))) for name in ("o2", "o3"))
    assert first["untrained_head"] is True
    # the missing head weights are drawn from the seed, so even this meaningless figure is reproducible
    assert first["pseudo_perplexity"] == again["pseudo_perplexity"]


def test_bad_config_values_are_named(tmp_path):
    with pytest.raises(ConfigError) as err:
        compose_job("score", [f"texts={tmp_path}", "variant=word", "ci.confidence=1.5", "batch_size=0"])
    message = str(err.value)
    assert "variant='word'" in message and "ci.confidence=1.5" in message and "batch_size=0" in message


def test_debug_preset_runs_within_its_budget(tmp_path):
    # debug/tiny: tiny random model with the packaged tokenizer, max_docs=4, max_tokens=64
    texts = _texts(tmp_path)
    result = run(compose_job("score", ["debug=tiny", f"texts={texts}", f"out_dir={tmp_path / 'out'}",
                                       "runtime.progress=false", "runtime.num_threads=1"]))
    assert result["n_docs"] <= 4 and 0 < result["total_tokens"] <= 64


def _cli(args: list[str], cwd: Path) -> subprocess.Popen:
    return start_console("adapt-score", args, cwd)


@pytest.mark.slow
def test_console_script_success_and_one_line_refusal(tiny_encoder, tiny_encoder_headless, tmp_path):
    texts = _texts(tmp_path)
    # both processes at once: most of their time is importing torch and transformers
    ok_proc = _cli(_overrides(tiny_encoder, texts, tmp_path / "ok"), tmp_path)
    bad_proc = _cli(_overrides(tiny_encoder_headless, texts, tmp_path / "bad"), tmp_path)
    ok_out, ok_err = ok_proc.communicate(timeout=180)
    _, bad_err = bad_proc.communicate(timeout=180)
    assert ok_proc.returncode == 0, ok_err
    assert (tmp_path / "ok" / "scores.json").exists()
    assert any(ln.startswith("pseudo-perplexity ") for ln in ok_out.splitlines())
    assert bad_proc.returncode == 2
    errors = [ln for ln in bad_err.splitlines() if ln.startswith("error:")]
    assert len(errors) == 1 and "allow_untrained_head=true" in errors[0] and "Traceback" not in bad_err
