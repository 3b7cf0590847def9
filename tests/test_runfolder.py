"""Run folders: refusal of non-empty folders, atomic writes, deterministic Parquet, hashes."""

from __future__ import annotations

import errno
import hashlib
import os

import numpy as np
import pandas as pd
import pytest

from pipelines import runfolder
from readonly import read_only_folder
from pipelines.runfolder import (IN_PROGRESS_MARKER, RunFolderError, atomic_write_bytes,
                                 atomic_write_json, atomic_write_parquet, create_run_folder,
                                 parquet_bytes, read_parquet, release_run_folder, sha256_file)


def _table(seed: int = 0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    return pd.DataFrame({"depth_cm": np.arange(50.0), "age_median": rng.normal(size=50).cumsum(),
                         "label": [f"d{i}" for i in range(50)], "flag": rng.random(50) > 0.5})


def test_new_folder_is_created_and_marked(tmp_path):
    folder = create_run_folder(tmp_path / "a" / "run")
    assert folder.is_dir() and (folder / IN_PROGRESS_MARKER).is_file()


def test_existing_empty_folder_is_accepted(tmp_path):
    (tmp_path / "run").mkdir()
    assert create_run_folder(tmp_path / "run").is_dir()


def test_non_empty_folder_is_refused(tmp_path):
    (tmp_path / "run").mkdir()
    (tmp_path / "run" / "keep.txt").write_text("mine")
    with pytest.raises(RunFolderError, match="not empty"):
        create_run_folder(tmp_path / "run")
    assert (tmp_path / "run" / "keep.txt").read_text() == "mine"


def test_unfinished_run_needs_resume_and_finished_run_is_never_reused(tmp_path):
    folder = create_run_folder(tmp_path / "run")
    (folder / "half.parquet").write_bytes(b"x")
    release_run_folder(folder, finished=False)  # as if the run had died
    with pytest.raises(RunFolderError, match="--resume"):
        create_run_folder(folder)
    create_run_folder(folder, resume=True)
    assert not (folder / "half.parquet").exists()
    release_run_folder(folder, finished=False)
    (folder / "manifest.json").write_text("{}")
    with pytest.raises(RunFolderError, match="never overwrites"):
        create_run_folder(folder, resume=True)


def test_parquet_is_byte_identical_and_round_trips(tmp_path):
    """Same table -> same bytes, on separate writes; no pandas index, no metadata."""
    a = atomic_write_parquet(tmp_path / "a.parquet", _table())
    b = atomic_write_parquet(tmp_path / "b.parquet", _table().copy())
    assert a.read_bytes() == b.read_bytes()
    back = read_parquet(a)
    pd.testing.assert_frame_equal(back, _table(), check_dtype=False)
    import pyarrow.parquet as pq

    assert pq.read_schema(a).metadata in (None, {})
    assert parquet_bytes(_table(1)) != parquet_bytes(_table(0))


def test_index_is_dropped(tmp_path):
    frame = _table().set_index("label")
    assert "label" not in read_parquet(atomic_write_parquet(tmp_path / "x.parquet", frame)).columns


def test_atomic_write_leaves_no_temporary_file(tmp_path):
    atomic_write_json(tmp_path / "m.json", {"b": 1, "a": [1.5, "x"]})
    assert [p.name for p in tmp_path.iterdir()] == ["m.json"]
    assert (tmp_path / "m.json").read_text().startswith('{\n  "a"')


def test_sha256_matches_hashlib(tmp_path):
    """Checked against hashlib on the same bytes (reference implementation)."""
    data = os.urandom(3_000_000)
    (tmp_path / "f").write_bytes(data)
    assert sha256_file(tmp_path / "f", chunk_bytes=4096) == hashlib.sha256(data).hexdigest()


@pytest.mark.parametrize("code, words", [(errno.ENOSPC, "disk is full"), (errno.EACCES, "permission denied")])
def test_disk_full_and_permission_errors_are_clear_and_leave_nothing(tmp_path, monkeypatch, code, words):
    (tmp_path / "out.parquet").write_bytes(b"old complete file")
    real_fsync = os.fsync

    def failing_fsync(fd):
        raise OSError(code, os.strerror(code))

    monkeypatch.setattr(runfolder.os, "fsync", failing_fsync)
    with pytest.raises(RunFolderError, match=words) as info:
        atomic_write_bytes(tmp_path / "out.parquet", b"new content")
    monkeypatch.setattr(runfolder.os, "fsync", real_fsync)
    assert info.value.errno == code
    assert (tmp_path / "out.parquet").read_bytes() == b"old complete file"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.parquet"]


def test_read_only_folder_gives_permission_error(tmp_path):
    with read_only_folder(tmp_path / "ro") as folder:
        with pytest.raises(RunFolderError, match="permission denied"):
            atomic_write_bytes(folder / "x.bin", b"1")


def test_publish_folder_keeps_first_copy(tmp_path):
    with runfolder.staging_folder(tmp_path, "entry") as staged:
        (staged / "f").write_text("first")
        runfolder.publish_folder(staged, tmp_path / "entry")
    with runfolder.staging_folder(tmp_path, "entry") as staged:
        (staged / "f").write_text("second")
        runfolder.publish_folder(staged, tmp_path / "entry")
    assert (tmp_path / "entry" / "f").read_text() == "first"
    assert [p.name for p in tmp_path.iterdir()] == ["entry"]
