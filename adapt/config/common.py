"""Config groups shared by several jobs: encoder, masking, runtime."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Optional

from adapt.common.errors import Problems

PACKAGED_ENCODER = "packaged:all-minilm-l6-v2"
PRECISIONS = ("auto", "fp32", "bf16")  # runtime.precision values; adapt.common.runtime resolves "auto"


@dataclass
class EncoderConfig:
    # Local folder, model id already in the local cache, or "packaged:all-minilm-l6-v2" (the encoder shipped
    # as a Python package; needs no network).
    name_or_path: str = PACKAGED_ENCODER
    # Build a randomly initialised model with the tokenizer of name_or_path and these config overrides
    # (e.g. hidden_size: 32). For smoke runs and tests only.
    random_init: bool = False
    random_overrides: dict[str, Any] = field(default_factory=dict)
    # Never run code shipped with a model unless the user opts in.
    trust_remote_code: bool = False
    # Tokens per sequence, including the special tokens.
    max_seq_len: int = 128


@dataclass
class MaskingConfig:
    # Share of non-special tokens selected for prediction (Devlin et al. 2019, BERT §3.1: 0.15).
    rate: float = 0.15
    # Of the selected tokens: share replaced by the mask token, share replaced by a random token;
    # the rest stay unchanged (BERT: 0.8 / 0.1 / 0.1).
    mask_share: float = 0.8
    random_share: float = 0.1
    # What is selected: "token" (each token on its own) or "word" (all pieces of a word or none, from the fast
    # tokenizer's word ids; the whole-word-masking release of the original BERT code). Same rate and split.
    unit: str = "token"


MASKING_UNITS = ("token", "word")


@dataclass
class RuntimeConfig:
    # "auto" picks a GPU when one is visible, else the CPU.
    device: str = "auto"
    # "auto", "fp32" or "bf16" (autocast). "auto" picks bf16 only where it is fast: a GPU with native bf16, or a
    # CPU with avx512_bf16/AMX (or one where a quick matmul probe finds bf16 no slower than fp32); else fp32.
    precision: str = "auto"
    # CPU threads for torch; 0 leaves torch's default.
    num_threads: int = 0
    # Show tqdm progress bars.
    progress: bool = True


def validate_encoder(cfg: EncoderConfig, prefix: str, p: Problems) -> None:
    p.check(bool(cfg.name_or_path), f"{prefix}.name_or_path is empty; give a folder or {PACKAGED_ENCODER}")
    p.check(8 <= cfg.max_seq_len <= 8192,
            f"{prefix}.max_seq_len={cfg.max_seq_len} is outside [8, 8192]; try {prefix}.max_seq_len=128")


def validate_masking(cfg: MaskingConfig, prefix: str, p: Problems) -> None:
    p.check(0.0 < cfg.rate < 1.0, f"{prefix}.rate={cfg.rate} is outside (0, 1); try {prefix}.rate=0.15")
    p.check(0.0 <= cfg.mask_share <= 1.0,
            f"{prefix}.mask_share={cfg.mask_share} is outside [0, 1]; try {prefix}.mask_share=0.8")
    p.check(0.0 <= cfg.random_share <= 1.0,
            f"{prefix}.random_share={cfg.random_share} is outside [0, 1]; try {prefix}.random_share=0.1")
    p.check(cfg.mask_share + cfg.random_share <= 1.0 + 1e-9,
            f"{prefix}.mask_share + {prefix}.random_share = {cfg.mask_share + cfg.random_share} exceeds 1; "
            f"try mask_share=0.8 random_share=0.1")
    p.check(cfg.unit in MASKING_UNITS,
            f"{prefix}.unit={cfg.unit!r} is not one of {', '.join(MASKING_UNITS)}; try {prefix}.unit=token")


def validate_runtime(cfg: RuntimeConfig, prefix: str, p: Problems) -> None:
    p.check(cfg.device in ("auto", "cpu", "cuda") or cfg.device.startswith("cuda:"),
            f"{prefix}.device={cfg.device!r} is not one of auto, cpu, cuda, cuda:N; try {prefix}.device=auto")
    p.check(cfg.precision in PRECISIONS,
            f"{prefix}.precision={cfg.precision!r} is not one of {', '.join(PRECISIONS)}; "
            f"try {prefix}.precision=auto")
    p.check(cfg.num_threads >= 0, f"{prefix}.num_threads={cfg.num_threads} is negative; use 0 for the default")


def validate_out_dir_apart(out_dir: str, inputs: list[str], k: str, p: Problems) -> None:
    """``out_dir`` must not overlap an input folder: writing there would modify an input (checked at compose time,
    before Hydra creates the folder and writes .hydra/ into it)."""
    out = Path(out_dir).resolve()
    for raw in inputs:
        inp = Path(raw).resolve()
        if out == inp or inp in out.parents:
            p.add(f"{k}out_dir={out_dir} is inside the input folder {raw}; choose an out_dir outside the inputs")
        elif out in inp.parents:
            p.add(f"{k}out_dir={out_dir} contains the input {raw}; choose an out_dir outside the inputs")


def optional_str(value: Optional[str]) -> Optional[str]:
    """Treat '', 'null' and 'none' as unset (handy on the command line)."""
    if value is None or str(value).strip().lower() in ("", "null", "none"):
        return None
    return value
