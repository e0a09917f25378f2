"""runtime.precision: "auto" picks bf16 only where the hardware is fast at it, every job records its choice.

The hardware checks and the timing probe are replaced by fakes, so each outcome is tested on any machine.
"""

from __future__ import annotations

import json
import logging
import sys
from pathlib import Path

import pytest
import torch

from adapt.common import runtime
from adapt.common.errors import ConfigError, Problems
from adapt.common.runtime import (Bf16Support, MatmulProbe, autocast_context, cpu_bf16_support, probe_matmul,
                                  resolve_precision)
from adapt.config import compose_job
from adapt.config.common import RuntimeConfig, validate_runtime

CPU = torch.device("cpu")
EMULATED = Bf16Support(False, "CPU AVX2 has no native bf16")
NATIVE = Bf16Support(True, "CPU AVX512 with avx512_bf16")
UNSURE = Bf16Support(None, "CPU AVX512 without avx512_bf16/AMX flags")


def _hardware(monkeypatch, support: Bf16Support, probe: MatmulProbe | None = None) -> list[int]:
    """Fake the capability check and the probe; returns a list that counts probe calls."""
    calls: list[int] = []

    def fake_probe(device, *args, **kwargs):
        calls.append(1)
        if probe is None:
            raise AssertionError("the probe must not run when the hardware reports native bf16")
        return probe

    monkeypatch.setattr(runtime, "cpu_bf16_support", lambda: support)
    monkeypatch.setattr(runtime, "probe_matmul", fake_probe)
    return calls


# ---------- config ----------

def test_auto_is_the_default_and_the_only_values_are_auto_fp32_bf16():
    assert RuntimeConfig().precision == "auto"
    for good in ("auto", "fp32", "bf16"):
        p = Problems()
        validate_runtime(RuntimeConfig(precision=good), "runtime", p)
        assert p.messages == []
    p = Problems()
    validate_runtime(RuntimeConfig(precision="fp16"), "runtime", p)
    assert len(p.messages) == 1 and "\n" not in p.messages[0]
    assert "runtime.precision='fp16'" in p.messages[0] and "auto, fp32, bf16" in p.messages[0]


def test_no_shipped_config_forces_a_precision():
    # the demo used to force bf16, which an AVX2 CPU emulates far slower than fp32
    for overrides in ([], ["debug=tiny"]):
        demo = compose_job("demo", overrides)
        assert [demo.pretrain.runtime.precision, demo.score.runtime.precision,
                demo.compare.runtime.precision] == ["auto"] * 3


# ---------- resolving "auto" ----------

def test_auto_is_fp32_where_bf16_is_emulated(monkeypatch):
    calls = _hardware(monkeypatch, EMULATED, MatmulProbe(256, 60.0, 1.0))
    choice = resolve_precision(RuntimeConfig(precision="auto"), CPU)
    assert choice.precision == "fp32" and not choice.bf16_native
    assert "no native bf16" in choice.reason and "60x slower" in choice.reason
    assert len(calls) == 1  # measured once, to say how much slower


def test_auto_stays_fp32_on_emulated_hardware_even_if_a_noisy_probe_says_otherwise(monkeypatch):
    _hardware(monkeypatch, EMULATED, MatmulProbe(256, 10.0, 11.0))
    assert resolve_precision(RuntimeConfig(precision="auto"), CPU).precision == "fp32"


def test_auto_is_bf16_where_the_cpu_reports_native_bf16(monkeypatch):
    calls = _hardware(monkeypatch, NATIVE)
    choice = resolve_precision(RuntimeConfig(precision="auto"), CPU)
    assert choice.precision == "bf16" and choice.bf16_native
    assert choice.reason.startswith("auto:") and "avx512_bf16" in choice.reason
    assert calls == []


@pytest.mark.parametrize(("probe", "expected"), [(MatmulProbe(256, 50.0, 20.0), "fp32"),
                                                  (MatmulProbe(256, 50.0, 80.0), "bf16")])
def test_when_unsure_the_probe_decides(monkeypatch, probe, expected):
    calls = _hardware(monkeypatch, UNSURE, probe)
    choice = resolve_precision(RuntimeConfig(precision="auto"), CPU)
    assert choice.precision == expected and len(calls) == 1
    assert choice.record()["probe"] == {"matmul_size": 256, "fp32_gflops": 50.0, "bf16_gflops": probe.bf16_gflops}


def test_probe_times_fp32_against_bf16(monkeypatch):
    # a fake timer: the bf16 product takes 40 times longer than the fp32 one
    def fake_best_seconds(a, b, repeats):
        return 0.04 if a.dtype == torch.bfloat16 else 0.001

    monkeypatch.setattr(runtime, "_best_seconds", fake_best_seconds)
    runtime._probe_cached.cache_clear()
    try:
        probe = probe_matmul(CPU, size=64, repeats=1)
    finally:
        runtime._probe_cached.cache_clear()
    flop = 2 * 64 ** 3  # a square n×n matmul costs 2n³ floating-point operations (common practice)
    assert probe.fp32_gflops == pytest.approx(flop / 0.001 / 1e9)
    assert probe.bf16_gflops == pytest.approx(flop / 0.04 / 1e9)
    assert probe.bf16_slowdown == pytest.approx(40.0) and probe.compared() == "40x slower"


def test_real_probe_is_quick_and_restores_the_thread_count():
    before = torch.get_num_threads()
    runtime._probe_cached.cache_clear()
    probe = probe_matmul(CPU, size=32, repeats=1)
    assert probe.fp32_gflops > 0 and probe.bf16_gflops > 0
    assert torch.get_num_threads() == before


# ---------- the capability check ----------

def test_cpu_capability_from_flags(monkeypatch):
    monkeypatch.setattr(runtime, "_torch_cpu_bf16_units", set)
    monkeypatch.setattr(runtime.platform, "machine", lambda: "x86_64")
    monkeypatch.setattr(torch.backends.cpu, "get_cpu_capability", lambda: "AVX2")
    monkeypatch.setattr(runtime, "_cpuinfo_flags", lambda: {"avx2", "fma"})
    assert cpu_bf16_support().native is False
    monkeypatch.setattr(runtime, "_cpuinfo_flags", lambda: {"avx2", "amx_bf16"})
    # AMX in the CPU, but torch's kernels held to AVX2 (ATEN_CPU_CAPABILITY=avx2): bf16 is emulated
    assert cpu_bf16_support().native is False
    monkeypatch.setattr(runtime, "_cpuinfo_flags", lambda: {"avx512f", "avx512bw"})
    monkeypatch.setattr(torch.backends.cpu, "get_cpu_capability", lambda: "AVX512")
    assert cpu_bf16_support().native is None  # AVX512 alone: the probe decides
    monkeypatch.setattr(runtime, "_torch_cpu_bf16_units", lambda: {"avx512_bf16"})
    assert cpu_bf16_support().native is True
    # oneDNN's ISA cap (its documented ONEDNN_MAX_CPU_ISA values) decides which matmul kernels run
    monkeypatch.setenv("ONEDNN_MAX_CPU_ISA", "AVX2")
    assert cpu_bf16_support().native is False
    monkeypatch.setenv("ONEDNN_MAX_CPU_ISA", "AVX512_CORE_AMX")
    assert cpu_bf16_support().native is True


# ---------- explicit values ----------

def test_explicit_bf16_on_emulated_hardware_warns_how_much_slower(monkeypatch, caplog):
    _hardware(monkeypatch, EMULATED, MatmulProbe(256, 45.0, 1.0))
    with caplog.at_level(logging.INFO, logger="adapt.common.runtime"):
        choice = resolve_precision(RuntimeConfig(precision="bf16"), CPU)
    assert choice.precision == "bf16" and not choice.bf16_native  # the user's choice is kept
    warnings = [r.getMessage() for r in caplog.records if r.levelno == logging.WARNING]
    assert len(warnings) == 1 and "45x slower than fp32 on this CPU" in warnings[0]
    assert any(r.getMessage().startswith("precision bf16 (requested") for r in caplog.records)


def test_explicit_bf16_on_native_hardware_does_not_warn(monkeypatch, caplog):
    _hardware(monkeypatch, NATIVE)
    with caplog.at_level(logging.INFO, logger="adapt.common.runtime"):
        assert resolve_precision(RuntimeConfig(precision="bf16"), CPU).precision == "bf16"
    assert not [r for r in caplog.records if r.levelno >= logging.WARNING]


def test_explicit_fp32_needs_no_probe(monkeypatch):
    calls = _hardware(monkeypatch, NATIVE)
    assert resolve_precision(RuntimeConfig(precision="fp32"), CPU).precision == "fp32" and calls == []


def test_unknown_value_from_library_use_is_a_config_error():
    with pytest.raises(ConfigError, match="runtime.precision='fp16'"):
        resolve_precision(RuntimeConfig(precision="fp16"), CPU, announce=False)


# ---------- the one autocast helper ----------

def test_autocast_context():
    layer = torch.nn.Linear(4, 4)
    x = torch.randn(2, 4, generator=torch.Generator().manual_seed(0))
    with autocast_context("bf16", CPU):
        assert layer(x).dtype == torch.bfloat16
    with torch.autocast("cpu", dtype=torch.bfloat16), autocast_context("fp32", CPU):
        assert layer(x).dtype == torch.float32  # fp32 means fp32 even inside an outer autocast
    with pytest.raises(RuntimeError, match="resolve_precision"):
        autocast_context("auto", CPU)


# ---------- jobs record the chosen precision ----------

@pytest.fixture
def restore_threads():
    before = torch.get_num_threads()
    yield
    torch.set_num_threads(before)


def test_score_job_writes_the_chosen_precision(monkeypatch, caplog, tmp_path, tiny_encoder, restore_threads):
    from adapt.stages.score import run

    _hardware(monkeypatch, NATIVE)
    texts = tmp_path / "texts.jsonl"
    texts.write_text("".join(json.dumps({"id": f"d{i}", "text": t}) + "\n" for i, t in
                             enumerate(["the tenant gave notice", "the nurse checked the dose"])), encoding="utf-8")
    cfg = compose_job("score", [f"encoder.name_or_path={tiny_encoder}", "encoder.max_seq_len=32", f"texts={texts}",
                                f"out_dir={tmp_path / 'out'}", "runtime.progress=false", "runtime.num_threads=1",
                                "runtime.device=cpu", "ci.bootstrap_resamples=0"])
    with caplog.at_level(logging.INFO, logger="adapt.common.runtime"):
        run(cfg)
    scores = json.loads((tmp_path / "out" / "scores.json").read_text())
    manifest = json.loads((tmp_path / "out" / "manifest.json").read_text())
    assert scores["precision"] == "bf16"  # the chosen one, not "auto"
    assert manifest["precision"]["requested"] == "auto" and manifest["precision"]["chosen"] == "bf16"
    assert "avx512_bf16" in manifest["precision"]["reason"]
    assert [r.getMessage() for r in caplog.records if r.getMessage().startswith("precision ")] == \
        [f"precision bf16 ({manifest['precision']['reason']})"]


def test_pretrain_job_records_the_chosen_precision(monkeypatch, tmp_path, tiny_encoder):
    from adapt.stages.pretrain import run
    from tests.e2e.test_pretrain import tiny_cfg

    # fp32 only: accelerate keeps one mixed-precision setting per process, shared with the other pretrain tests
    _hardware(monkeypatch, EMULATED, MatmulProbe(256, 60.0, 1.0))
    cfg = tiny_cfg(tmp_path, tiny_encoder, "run", "schedule.max_steps=1", "schedule.warmup_steps=0",
                   "eval.pppl_max_tokens=16", "runtime.device=cpu")
    result = run(cfg)
    assert result["completed"] and "pppl_domain" in result["end"]  # the pppl pass got the resolved precision
    manifest = json.loads((tmp_path / "run" / "manifest.json").read_text())
    assert manifest["precision"]["requested"] == "auto" and manifest["precision"]["chosen"] == "fp32"
    assert manifest["precision"]["probe"]["bf16_gflops"] == 1.0


def test_compare_job_fine_tunes_in_the_chosen_precision(monkeypatch, tmp_path, restore_threads):
    import adapt.evaluation.finetune as finetune_module
    from adapt.stages.compare import run
    from tests.conftest import build_tiny_encoder
    from tests.e2e.test_compare import make_task

    _hardware(monkeypatch, NATIVE)
    seen = []
    original = finetune_module.finetune

    def spy(*args, **kwargs):
        seen.append(kwargs.get("precision"))
        return original(*args, **kwargs)

    monkeypatch.setattr(finetune_module, "finetune", spy)
    encoder = build_tiny_encoder(tmp_path / "enc")
    task = make_task(tmp_path / "task", sizes=(12, 6, 6))
    cfg = compose_job("compare", [f"+arms.base={encoder}", f"task.dir={task}", "debug=tiny", "seeds=[0]",
                                  "tfidf_baseline=false", "runtime.progress=false", "runtime.device=cpu",
                                  "runtime.num_threads=1", f"out_dir={tmp_path / 'out'}"])
    run(cfg)
    assert seen == ["bf16"]
    manifest = json.loads((tmp_path / "out" / "manifest.json").read_text())
    assert manifest["precision"]["requested"] == "auto" and manifest["precision"]["chosen"] == "bf16"


def test_config_modules_do_not_import_torch():
    import subprocess

    code = "import sys, adapt.config.common; print('torch' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                         cwd=Path(__file__).resolve().parents[2])
    assert out.stdout.strip() == "False"


def test_two_pretrain_jobs_in_one_process_may_use_different_precisions(monkeypatch):
    # accelerate keeps one AcceleratorState per process and refuses a second Accelerator with another
    # mixed_precision; a library user running two jobs in one interpreter (and this test suite) must not hit that
    from adapt.stages.pretrain import _accelerator

    _hardware(monkeypatch, NATIVE)
    first, _ = _accelerator(compose_job("pretrain", ["corpus_dir=unused", "runtime.device=cpu", "runtime.precision=bf16"]))
    assert first.mixed_precision == "bf16"
    second, _ = _accelerator(compose_job("pretrain", ["corpus_dir=unused", "runtime.device=cpu", "runtime.precision=fp32"]))
    assert second.mixed_precision == "no"
