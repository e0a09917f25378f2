"""Shared fixtures: a tiny random BERT (hidden 32, 2 layers, ~120-token WordPiece vocab) saved to a folder."""

from __future__ import annotations

import os
import string
import subprocess
import sys
from pathlib import Path

import pytest

os.environ.setdefault("HF_HUB_OFFLINE", "1")
os.environ.setdefault("TOKENIZERS_PARALLELISM", "false")

TINY_WORDS = ("the court tenant landlord notice contract clause appeal judgment patient ward dose nurse scan "
              "report claim rent months of and to a in is was for on by with").split()


def start_console(script: str, args: list[str], cwd: Path) -> subprocess.Popen:
    """Start one of the installed console scripts (``adapt-score`` …) offline, with piped text output."""
    exe = Path(sys.executable).parent / script
    env = {**os.environ, "HF_HUB_OFFLINE": "1", "TOKENIZERS_PARALLELISM": "false"}
    return subprocess.Popen([str(exe), *args], cwd=cwd, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True)


def build_tiny_encoder(folder: Path, seed: int = 0, with_head: bool = True) -> Path:
    """Save a tiny random BertForMaskedLM and its WordPiece tokenizer into ``folder``.

    ``with_head=False`` drops the MLM head weights from the saved file, like the packaged encoder.
    """
    import torch
    from safetensors.torch import load_file, save_file
    from transformers import BertConfig, BertForMaskedLM, BertTokenizerFast

    folder.mkdir(parents=True, exist_ok=True)
    letters = list(string.ascii_lowercase)
    vocab = (["[PAD]", "[UNK]", "[CLS]", "[SEP]", "[MASK]"] + list(".,;:'-0123456789") + letters
             + [f"##{c}" for c in letters + list("0123456789")] + TINY_WORDS)
    tok = BertTokenizerFast(vocab={t: i for i, t in enumerate(vocab)}, do_lower_case=True)
    tok.save_pretrained(folder)
    config = BertConfig(vocab_size=len(vocab), hidden_size=32, num_hidden_layers=2, num_attention_heads=2,
                        intermediate_size=64, max_position_embeddings=128, type_vocab_size=2,
                        hidden_dropout_prob=0.1, attention_probs_dropout_prob=0.1)
    torch.manual_seed(seed)
    model = BertForMaskedLM(config)
    model.save_pretrained(folder)
    if not with_head:
        weights = folder / "model.safetensors"
        state = {k: v for k, v in load_file(str(weights)).items() if not k.startswith("cls.")}
        save_file(state, str(weights), metadata={"format": "pt"})
    return folder


@pytest.fixture
def tiny_encoder(tmp_path: Path) -> Path:
    return build_tiny_encoder(tmp_path / "tiny-encoder")


@pytest.fixture
def tiny_encoder_headless(tmp_path: Path) -> Path:
    return build_tiny_encoder(tmp_path / "tiny-encoder-headless", with_head=False)
