"""final/ and base/ are written to a temporary folder and renamed: an export that fails half way leaves no
half-written model folder, and an earlier complete one stays as it was."""

from __future__ import annotations

import errno

import pytest
from transformers import AutoModelForMaskedLM, AutoTokenizer

from adapt.common.errors import InputError
from adapt.common.io import hash_file
from adapt.training.export import export_checkpoint


class _FullDisk:
    """A tokenizer whose files cannot be written: the weights are already on disk when it fails."""

    def __init__(self, tokenizer):
        self._tokenizer = tokenizer

    def save_pretrained(self, folder, *args, **kwargs):
        raise OSError(errno.ENOSPC, "No space left on device", str(folder))


def _digest(folder):
    return {p.name: hash_file(p) for p in sorted(folder.iterdir()) if p.is_file()}


def test_a_failed_export_leaves_no_partial_folder_and_keeps_the_previous_one(tmp_path, tiny_encoder):
    model = AutoModelForMaskedLM.from_pretrained(tiny_encoder)
    tokenizer = AutoTokenizer.from_pretrained(tiny_encoder)
    with pytest.raises(InputError, match="No space left on device"):
        export_checkpoint(model, _FullDisk(tokenizer), tmp_path / "final")
    assert not (tmp_path / "final").exists()
    assert not [p for p in tmp_path.iterdir() if p.name != "tiny-encoder"], "no temporary folder is left behind"
    export_checkpoint(model, tokenizer, tmp_path / "final")
    before = _digest(tmp_path / "final")
    with pytest.raises(InputError):
        export_checkpoint(model, _FullDisk(tokenizer), tmp_path / "final")
    assert _digest(tmp_path / "final") == before
    _, info = AutoModelForMaskedLM.from_pretrained(tmp_path / "final", output_loading_info=True)
    assert not info["missing_keys"]


def test_exported_files_get_the_modes_the_umask_gives(tmp_path, tiny_encoder):
    # transformers' save_pretrained writes model.safetensors owner-only (0600) while every other file follows the
    # umask; a folder meant to be shared must be readable as the umask allows (POSIX umask semantics: a new file is
    # 0666 & ~umask; common practice)
    import os

    model = AutoModelForMaskedLM.from_pretrained(tiny_encoder)
    tokenizer = AutoTokenizer.from_pretrained(tiny_encoder)
    old = os.umask(0o022)
    try:
        export_checkpoint(model, tokenizer, tmp_path / "final")
    finally:
        os.umask(old)
    modes = {p.name: p.stat().st_mode & 0o777 for p in (tmp_path / "final").iterdir()}
    assert modes["model.safetensors"] == 0o644 and set(modes.values()) == {0o644}, modes
