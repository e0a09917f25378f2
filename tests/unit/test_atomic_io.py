"""Every final output goes through one atomic write: temp file in the same folder, fsync, os.replace, fsync of
the folder (POSIX rename durability: the file's data and the folder entry must both reach the disk; common
practice)."""

from __future__ import annotations

import os
import re
from pathlib import Path

import pytest

from adapt.common.io import atomic_write_with

needs_proc = pytest.mark.skipif(not Path("/proc/self/fd").is_dir(), reason="needs /proc to name fsynced files")


@pytest.fixture
def fsynced(monkeypatch) -> list[Path]:
    """Paths passed to os.fsync during the test (resolved through /proc/self/fd); a temp file
    ``.<name>.<random>.tmp`` is listed under the name it is renamed to."""
    seen: list[Path] = []
    real = os.fsync

    def spy(fd: int) -> None:
        path = Path(os.readlink(f"/proc/self/fd/{fd}"))
        temp = re.fullmatch(r"\.(.+)\.[^.]+\.tmp", path.name)
        seen.append(path.with_name(temp.group(1)) if temp else path)
        real(fd)

    monkeypatch.setattr(os, "fsync", spy)
    return seen


@needs_proc
def test_atomic_write_with_fsyncs_the_file_and_its_folder(tmp_path, fsynced):
    tmp_path = tmp_path.resolve()  # /proc names real paths
    target = tmp_path / "out" / "data.bin"
    atomic_write_with(target, lambda tmp: tmp.write_bytes(b"payload"))
    assert target.read_bytes() == b"payload"
    assert fsynced == [target, target.parent]  # the data before the rename, the folder entry after it
    assert sorted(p.name for p in target.parent.iterdir()) == ["data.bin"]


def test_a_failed_write_keeps_the_old_file_and_leaves_no_temp(tmp_path):
    target = tmp_path / "data.bin"
    target.write_bytes(b"old")

    def broken(tmp: Path) -> None:
        tmp.write_bytes(b"half")
        raise OSError("disk full")

    with pytest.raises(OSError, match="disk full"):
        atomic_write_with(target, broken)
    assert target.read_bytes() == b"old"
    assert [p.name for p in tmp_path.iterdir()] == ["data.bin"]


@needs_proc
def test_checkpoint_files_and_folders_are_fsynced(tmp_path, fsynced):
    tmp_path = tmp_path.resolve()
    import torch

    from adapt.contracts.checkpoint import save_checkpoint

    model = torch.nn.Linear(3, 2)
    opt = torch.optim.SGD(model.parameters(), lr=0.1)
    sched = torch.optim.lr_scheduler.LambdaLR(opt, lambda step: 1.0)
    from safetensors.torch import save_model

    folder = save_checkpoint(tmp_path / "checkpoints", 4, lambda f: save_model(model, str(f / "model.safetensors")),
                             opt, sched, {"seed": 0}, keep_last=2)
    names = {p.name for p in fsynced}
    assert {"model.safetensors", "optimizer.pt", "scheduler.pt", "state.json", "index.json"} <= names
    assert folder.parent in fsynced  # the rename of the finished step folder


@needs_proc
def test_prepared_shards_are_fsynced(tmp_path, fsynced):
    tmp_path = tmp_path.resolve()
    from adapt.contracts.prepared_corpus import OUTPUT_SCHEMA, ShardWriter

    writer = ShardWriter(tmp_path / "train", OUTPUT_SCHEMA, shard_docs=1)
    for i in range(2):
        writer.add({"id": f"d{i}", "text": "t", "source": "s", "quality": 1.0, "cluster_id": i, "cluster_size": 1,
                    "words": 1})
    writer.close()
    shards = [tmp_path / "train" / f"part-0000{i}.parquet" for i in range(2)]
    assert [p for p in fsynced if p.suffix == ".parquet"] == shards
    assert fsynced.count(tmp_path / "train") == 2
