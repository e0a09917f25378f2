"""Apply the shared ``runtime`` config group: CPU threads, the device and the precision every model job runs in.

Precision: bf16 autocast is faster where the hardware computes in bf16 (recent GPUs; x86 CPUs with avx512_bf16 or
AMX), but a CPU without those units emulates it: on a 2-core AVX2 CPU a 256² bf16 matmul ran ~80x slower than in
fp32. So ``auto`` picks bf16 only where the hardware reports native support, or, where it cannot tell, where a
sub-second matmul probe finds bf16 no slower than fp32. Every model job resolves its precision once here and runs
its forward passes under ``autocast_context``.
"""

from __future__ import annotations

import contextlib
import functools
import logging
import math
import os
import platform
import time
from dataclasses import dataclass
from pathlib import Path

import torch

from adapt.common.errors import ConfigError
from adapt.config.common import PRECISIONS, RuntimeConfig

log = logging.getLogger(__name__)

RESOLVED_PRECISIONS = ("fp32", "bf16")
_CPU_BF16_FLAGS = ("avx512_bf16", "amx_bf16")  # /proc/cpuinfo names of the x86 units that compute in bf16
_X86 = ("x86_64", "amd64", "i386", "i686", "x86")
_PROBE_SIZE = 256  # 2·256³ ≈ 34 MFLOP per product: ~25 ms when bf16 is emulated, ~1 ms in fp32 (AVX2, 1 thread)
_PROBE_REPEATS = 3  # best of 3 after one warm-up product


@dataclass(frozen=True)
class Bf16Support:
    """What the hardware reports: ``native`` True, False (bf16 would be emulated) or None (cannot tell)."""

    native: bool | None
    detail: str  # e.g. "CPU AVX2 has no native bf16"


@dataclass(frozen=True)
class MatmulProbe:
    """Best-of-N throughput of one square matmul, fp32 against bf16, on one device."""

    size: int
    fp32_gflops: float
    bf16_gflops: float

    @property
    def bf16_slowdown(self) -> float:
        """How many times longer bf16 took than fp32 (below 1: bf16 was faster)."""
        return self.fp32_gflops / self.bf16_gflops

    def compared(self) -> str:
        s = self.bf16_slowdown
        if s >= 1.05:
            return f"{s:.0f}x slower" if s >= 10 else f"{s:.1f}x slower"
        return f"{1 / s:.1f}x faster" if s <= 0.95 else "as fast"


@dataclass(frozen=True)
class PrecisionChoice:
    """The precision a job runs in (``precision`` is "fp32" or "bf16", never "auto") and why."""

    requested: str
    precision: str
    reason: str
    bf16_native: bool
    probe: MatmulProbe | None = None
    warning: str | None = None  # set when an explicit bf16 runs emulated

    def describe(self) -> str:
        return f"precision {self.precision} ({self.reason})"

    def record(self) -> dict:
        """The ``precision`` entry of a job's manifest."""
        rec = {"requested": self.requested, "chosen": self.precision, "reason": self.reason,
               "bf16_native": self.bf16_native}
        if self.probe is not None:
            rec["probe"] = {"matmul_size": self.probe.size, "fp32_gflops": round(self.probe.fp32_gflops, 2),
                            "bf16_gflops": round(self.probe.bf16_gflops, 2)}
        return rec


def apply_threads(runtime: RuntimeConfig) -> None:
    """Set torch's CPU thread count when the config asks for one (0 keeps torch's default)."""
    if runtime.num_threads > 0:
        torch.set_num_threads(runtime.num_threads)


def resolve_device(runtime: RuntimeConfig) -> torch.device:
    """``auto`` picks a GPU when one is visible, else the CPU."""
    if runtime.device == "auto":
        return torch.device("cuda" if torch.cuda.is_available() else "cpu")
    return torch.device(runtime.device)


def _cpuinfo_flags() -> set[str]:
    """CPU feature flags from /proc/cpuinfo (Linux); empty elsewhere."""
    try:
        text = Path("/proc/cpuinfo").read_text(encoding="utf-8", errors="replace")
    except OSError:
        return set()
    flags: set[str] = set()
    for line in text.splitlines():
        key, _, value = line.partition(":")
        if key.strip() in ("flags", "Features"):
            flags.update(value.split())
    return flags


def _torch_cpu_bf16_units() -> set[str]:
    """bf16 units torch itself detects (private helpers of ``torch.cpu``, absent from some builds)."""
    found = set()
    for helper, unit in (("_is_avx512_bf16_supported", "avx512_bf16"), ("_is_amx_tile_supported", "amx")):
        check = getattr(torch.cpu, helper, None)
        with contextlib.suppress(RuntimeError):
            if check is not None and check():
                found.add(unit)
    return found


# oneDNN's ONEDNN_MAX_CPU_ISA values (its documentation, "CPU dispatcher control") that stop below the bf16 units
_ONEDNN_NO_BF16 = ("SSE41", "AVX", "AVX2", "AVX2_VNNI", "AVX2_VNNI_2", "AVX512_CORE", "AVX512_CORE_VNNI")


def cpu_bf16_support() -> Bf16Support:
    """Native bf16 on this CPU: avx512_bf16 or AMX (torch's check or /proc/cpuinfo), unless torch's kernels are
    held below them (an x86 capability under AVX512, e.g. ATEN_CPU_CAPABILITY=avx2, or ONEDNN_MAX_CPU_ISA), where
    bf16 is certainly emulated; anything else (AVX512 alone, ARM) is left to a probe."""
    capability = torch.backends.cpu.get_cpu_capability()
    isa_cap = os.environ.get("ONEDNN_MAX_CPU_ISA", "").strip().upper()
    if platform.machine().lower() in _X86 and not capability.upper().startswith("AVX512"):
        return Bf16Support(False, f"CPU {capability} has no native bf16")
    if isa_cap in _ONEDNN_NO_BF16:
        return Bf16Support(False, f"CPU {capability} held to ONEDNN_MAX_CPU_ISA={isa_cap}: bf16 is emulated")
    units = _torch_cpu_bf16_units() | (_cpuinfo_flags() & set(_CPU_BF16_FLAGS))
    if units:
        return Bf16Support(True, f"CPU {capability} with {', '.join(sorted(units))}")
    return Bf16Support(None, f"CPU {capability} without avx512_bf16/AMX flags")


def bf16_support(device: torch.device) -> Bf16Support:
    if device.type == "cuda":
        name = torch.cuda.get_device_name(device)
        if torch.cuda.is_bf16_supported(including_emulation=False):
            return Bf16Support(True, f"GPU {name} has native bf16")
        return Bf16Support(False, f"GPU {name} has no native bf16")
    if device.type == "cpu":
        return cpu_bf16_support()
    return Bf16Support(False, f"no bf16 check for device type {device.type}")


def _best_seconds(a: torch.Tensor, b: torch.Tensor, repeats: int) -> float:
    sync = torch.cuda.synchronize if a.device.type == "cuda" else (lambda: None)
    a @ b  # warm-up: kernel selection, thread pool start
    sync()
    best = math.inf
    for _ in range(repeats):
        t0 = time.perf_counter()
        a @ b
        sync()
        best = min(best, time.perf_counter() - t0)
    return max(best, 1e-9)


@functools.lru_cache(maxsize=8)
def _probe_cached(device: str, size: int, repeats: int) -> MatmulProbe:
    gen = torch.Generator().manual_seed(0)  # own generator: the global RNG stays untouched
    a = torch.randn(size, size, generator=gen).to(device)
    b = torch.randn(size, size, generator=gen).to(device)
    threads = torch.get_num_threads()
    # one CPU thread: the kernels' speed per core, not how often a busy machine lets the other thread run
    # (on 2 shared cores a 2-thread fp32 product sometimes waited ~16 ms, 50x its real time)
    torch.set_num_threads(1)
    try:
        fp32 = _best_seconds(a, b, repeats)
        bf16 = _best_seconds(a.bfloat16(), b.bfloat16(), repeats)
    finally:
        torch.set_num_threads(threads)
    flop = 2 * size ** 3
    return MatmulProbe(size, flop / fp32 / 1e9, flop / bf16 / 1e9)


def probe_matmul(device: torch.device, size: int = _PROBE_SIZE, repeats: int = _PROBE_REPEATS) -> MatmulProbe:
    """Time a size² matmul in fp32 and in bf16 (a fraction of a second); measured once per device."""
    return _probe_cached(str(device), size, repeats)


def _resolve_bf16(device: torch.device, support: Bf16Support) -> PrecisionChoice:
    if support.native:
        return PrecisionChoice("bf16", "bf16", f"requested; {support.detail}", True)
    probe = probe_matmul(device) if device.type in ("cpu", "cuda") else None
    if probe is None or probe.bf16_slowdown <= 1.0:
        return PrecisionChoice("bf16", "bf16", f"requested; {support.detail}", False, probe)
    where = "GPU" if device.type == "cuda" else "CPU"
    warning = (f"runtime.precision=bf16: bf16 matmul measured {probe.compared()} than fp32 on this {where} "
               f"({probe.bf16_gflops:.1f} vs {probe.fp32_gflops:.1f} GFLOP/s; {support.detail}, so bf16 is "
               "emulated); runtime.precision=auto would choose fp32")
    return PrecisionChoice("bf16", "bf16", f"requested; {support.detail}; bf16 {probe.compared()} in a probe",
                           False, probe, warning)


def _resolve_auto(device: torch.device, support: Bf16Support) -> PrecisionChoice:
    if support.native:
        return PrecisionChoice("auto", "bf16", f"auto: {support.detail}", True)
    probe = probe_matmul(device) if device.type in ("cpu", "cuda") else None
    if support.native is False:
        measured = f", {probe.compared()} in a probe" if probe is not None else ""
        return PrecisionChoice("auto", "fp32", f"auto: {support.detail}; bf16 would be emulated{measured}", False,
                               probe)
    chosen = "bf16" if probe.bf16_slowdown <= 1.0 else "fp32"  # bf16 only if it is not slower
    return PrecisionChoice("auto", chosen, f"auto: {support.detail}; bf16 matmul {probe.compared()} than fp32 "
                           f"in a probe ({probe.bf16_gflops:.1f} vs {probe.fp32_gflops:.1f} GFLOP/s)", False, probe)


def announce_precision(choice: PrecisionChoice) -> None:
    """One log line with the choice and its reason; the warning of an emulated explicit bf16."""
    log.info("%s", choice.describe())
    if choice.warning:
        log.warning("%s", choice.warning)


def resolve_precision(runtime: RuntimeConfig, device: torch.device, *, announce: bool = True) -> PrecisionChoice:
    """The precision a job on ``device`` runs in: ``runtime.precision`` with "auto" resolved (see module doc)."""
    if runtime.precision not in PRECISIONS:
        raise ConfigError(f"runtime.precision={runtime.precision!r} is not one of {', '.join(PRECISIONS)}; "
                          "try runtime.precision=auto")
    support = bf16_support(device)
    if runtime.precision == "fp32":
        choice = PrecisionChoice("fp32", "fp32", "requested", bool(support.native))
    elif runtime.precision == "bf16":
        choice = _resolve_bf16(device, support)
    else:
        choice = _resolve_auto(device, support)
    if announce:
        announce_precision(choice)
    return choice


def autocast_context(precision: str, device: torch.device) -> contextlib.AbstractContextManager:
    """bf16 autocast on ``device`` for "bf16"; for "fp32" a context that keeps everything in fp32."""
    if precision not in RESOLVED_PRECISIONS:
        raise RuntimeError(f"autocast_context(precision={precision!r}): resolve the precision with "
                           "resolve_precision first (fp32 or bf16)")
    return torch.autocast(device_type=device.type, dtype=torch.bfloat16, enabled=precision == "bf16")
