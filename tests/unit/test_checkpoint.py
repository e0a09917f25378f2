"""Checkpoint files on disk: durable before they are named, rotation that never leaves the index naming nothing,
verification of sizes and hashes, and the resume lookup (POSIX rename durability: a file's data and its folder
entry must both be fsynced; common practice)."""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest
import torch

from adapt.common.errors import InputError
from adapt.contracts import checkpoint
from adapt.contracts.checkpoint import find_resume_point, save_checkpoint, verify_checkpoint


def _save(root: Path, step: int, keep_last: int = 1) -> Path:
    model = torch.nn.Linear(3, 2)
    optimizer = torch.optim.AdamW(model.parameters(), lr=0.1)
    scheduler = torch.optim.lr_scheduler.StepLR(optimizer, step_size=1)

    def write_weights(folder: Path) -> None:
        torch.save(model.state_dict(), folder / "weights.pt")

    return save_checkpoint(root, step, write_weights, optimizer, scheduler, {"cursor": {"position": step}},
                           keep_last)


def test_a_kill_before_the_index_is_updated_still_leaves_a_checkpoint_to_resume(tmp_path, monkeypatch):
    root = tmp_path / "checkpoints"
    _save(root, 1)
    real = checkpoint.atomic_write_json

    def killed_at_index(path, obj):
        if Path(path).name == checkpoint.INDEX:
            raise KeyboardInterrupt  # stands for SIGKILL between the rename and the index update
        real(path, obj)

    monkeypatch.setattr(checkpoint, "atomic_write_json", killed_at_index)
    with pytest.raises(KeyboardInterrupt):
        _save(root, 2)
    monkeypatch.undo()
    found = find_resume_point("auto", root)
    assert found is not None and verify_checkpoint(found) is None
    assert json.loads((found / "state.json").read_text())["step"] in (1, 2)


def test_rotation_prunes_only_after_the_index_names_the_new_checkpoint(tmp_path, monkeypatch):
    root = tmp_path / "checkpoints"
    events: list[str] = []
    real_write, real_rmtree = checkpoint.atomic_write_json, checkpoint.shutil.rmtree

    def write(path, obj):
        if Path(path).name == checkpoint.INDEX:
            events.append("index " + ",".join(e["folder"] for e in obj["checkpoints"]))
        real_write(path, obj)

    def rmtree(path, *args, **kwargs):
        events.append(f"remove {Path(path).name}")
        real_rmtree(path, *args, **kwargs)

    _save(root, 1)
    monkeypatch.setattr(checkpoint, "atomic_write_json", write)
    monkeypatch.setattr(checkpoint.shutil, "rmtree", rmtree)
    _save(root, 2)
    assert events.index("index step-2") < events.index("remove step-1"), events
    assert sorted(p.name for p in root.iterdir()) == ["index.json", "step-2"]


@pytest.mark.skipif(not Path("/proc/self/fd").is_dir(), reason="needs /proc to name fsynced files")
def test_every_file_and_folder_is_fsynced_before_the_rename_and_the_parent_after(tmp_path, monkeypatch):
    root = (tmp_path / "checkpoints").resolve()
    events: list[tuple[str, str]] = []
    real_fsync, real_rename, real_replace = os.fsync, os.rename, os.replace

    def fsync(fd):
        events.append(("fsync", os.readlink(f"/proc/self/fd/{fd}")))
        real_fsync(fd)

    def rename(src, dst, *args, **kwargs):
        events.append(("rename", f"{src} -> {dst}"))
        return real_rename(src, dst, *args, **kwargs)

    def replace(src, dst, *args, **kwargs):
        events.append(("rename", f"{src} -> {dst}"))
        return real_replace(src, dst, *args, **kwargs)

    monkeypatch.setattr(os, "fsync", fsync)
    monkeypatch.setattr(os, "rename", rename)
    monkeypatch.setattr(os, "replace", replace)
    final = _save(root, 3)
    folder_rename = next(i for i, (kind, what) in enumerate(events)
                         if kind == "rename" and what.endswith(f"-> {final}"))
    temp = events[folder_rename][1].split(" -> ")[0]
    synced_before = {what for kind, what in events[:folder_rename] if kind == "fsync"}
    for path in Path(final).rglob("*"):
        assert os.path.join(temp, path.relative_to(final)) in synced_before or \
            str(Path(temp) / path.relative_to(final)) in synced_before, f"{path.name} not fsynced before the rename"
    assert temp in synced_before, "the temporary folder itself must be fsynced before the rename"
    assert ("fsync", str(root)) in events[folder_rename:], "the parent folder must be fsynced after the rename"


def test_verification_names_the_damaged_file(tmp_path):
    final = _save(tmp_path / "checkpoints", 1)
    assert verify_checkpoint(final) is None
    (final / "optimizer.pt").write_bytes((final / "optimizer.pt").read_bytes()[:-1])
    assert "optimizer.pt" in verify_checkpoint(final)
    (final / "optimizer.pt").unlink()
    assert "optimizer.pt" in verify_checkpoint(final)


def test_a_damaged_newest_checkpoint_falls_back_to_the_previous_one(tmp_path, caplog):
    root = tmp_path / "checkpoints"
    _save(root, 1, keep_last=2)
    newest = _save(root, 2, keep_last=2)
    (newest / "weights.pt").write_bytes(b"torn")
    found = find_resume_point("auto", root)
    assert found == root / "step-1"
    assert "step-2" in caplog.text and "weights.pt" in caplog.text


def test_resume_refuses_when_checkpoints_exist_but_none_is_usable(tmp_path):
    root = tmp_path / "checkpoints"
    only = _save(root, 1)
    (only / "scheduler.pt").unlink()
    with pytest.raises(InputError, match="scheduler.pt is missing.*no usable checkpoint"):
        find_resume_point("auto", root)
    assert find_resume_point("auto", tmp_path / "nothing-here") is None


def test_resume_refuses_trained_steps_on_record_without_a_checkpoint(tmp_path):
    with pytest.raises(InputError, match="3 trained steps"):
        find_resume_point("auto", tmp_path / "checkpoints", trained_steps=3)


def test_resume_path_must_be_a_complete_checkpoint(tmp_path):
    with pytest.raises(InputError, match="not a checkpoint folder"):
        find_resume_point(str(tmp_path), tmp_path / "checkpoints")
    final = _save(tmp_path / "checkpoints", 1)
    (final / "weights.pt").write_bytes(b"")
    with pytest.raises(InputError, match="weights.pt"):
        find_resume_point(str(final), tmp_path / "checkpoints")
