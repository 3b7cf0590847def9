"""Run folders: a new folder per run, atomic writes and content hashes.

Every file downcore presents as a result is written to a temporary name in the folder it
belongs to, flushed to disk (``fsync``) and then renamed over its final name
(``os.replace``, atomic on POSIX file systems). A reader therefore sees either no file or
the complete file, never a half-written one, even when the run is killed or the disk fills.

Parquet files are written with fixed settings (no pandas index, no pandas or arrow schema
metadata, fixed compression and format version, no timestamps) so that the same table gives
the same bytes on every run.
"""

from __future__ import annotations

import contextlib
import errno
import hashlib
import io
import json
import os
import pathlib
import shutil
import tempfile
import uuid
from typing import Any, Iterator

import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq

from pipelines.runlock import LOCK_NAME, RunBusyError, RunLock, acquire_run_lock, describe_owner

__all__ = [
    "RunFolderError",
    "IN_PROGRESS_MARKER",
    "create_run_folder",
    "release_run_folder",
    "ensure_writable_folder",
    "atomic_write_bytes",
    "atomic_write_text",
    "atomic_write_json",
    "atomic_write_parquet",
    "parquet_bytes",
    "read_parquet",
    "atomic_copy",
    "link_or_copy",
    "publish_folder",
    "staging_folder",
    "sha256_bytes",
    "sha256_file",
    "json_text",
]

#: file present in a run folder while the run is still going (removed when it is complete)
IN_PROGRESS_MARKER = ".downcore-in-progress"

#: fixed Parquet writer settings (never change between runs; changing them changes bytes)
PARQUET_OPTIONS: dict[str, Any] = {
    "compression": "zstd",
    "compression_level": 3,
    "version": "2.6",
    "data_page_version": "1.0",
    "use_dictionary": True,
    "write_statistics": True,
    "store_schema": False,
}

#: run locks this process holds, by absolute folder path (see :mod:`pipelines.runlock`)
_HELD_LOCKS: dict[str, RunLock] = {}

_DISK_ERRNOS = {errno.ENOSPC, getattr(errno, "EDQUOT", errno.ENOSPC), errno.EFBIG}
_PERMISSION_ERRNOS = {errno.EACCES, errno.EPERM, errno.EROFS}


class RunFolderError(OSError):
    """A run folder or output file could not be created or written; the message says why and
    what to do."""


def _explain(error: OSError, path: pathlib.Path, action: str) -> RunFolderError:
    """Turn a low-level OS error into a message a user can act on."""
    if error.errno in _DISK_ERRNOS:
        reason = (f"the disk is full while {action} {path} -- free some space (or choose "
                  "another --out folder) and run again; no partial file was kept")
    elif error.errno in _PERMISSION_ERRNOS:
        reason = (f"permission denied while {action} {path} -- choose a folder you can "
                  "write to (or fix its permissions) and run again; no partial file was kept")
    else:
        reason = f"could not finish {action} {path}: {error.strerror or error}"
    return RunFolderError(error.errno or 0, reason)


def create_run_folder(path: str | os.PathLike[str], resume: bool = False,
                      identity: dict[str, Any] | None = None) -> pathlib.Path:
    """Create a new, empty run folder, take its run lock and mark it as in progress.

    Parameters
    ----------
    path : path-like
        The folder to create (parents are created too).
    resume : bool
        Accept a folder that holds an unfinished run whose process is gone (its in-progress
        marker is present and it has no ``manifest.json``); its partial content is discarded.
    identity : dict or None
        What the run is started with (:func:`pipelines.runlock.run_identity`); recorded in
        the lock, and a resume whose identity differs from the recorded one is refused.

    Returns
    -------
    pathlib.Path
        The absolute folder path. Release it with :func:`release_run_folder`.

    Raises
    ------
    RunFolderError
        When a run is going in the folder, when it exists and is not empty (and is not a
        resumable unfinished run of the same config), or when it cannot be created.
    """
    folder = pathlib.Path(path).expanduser().resolve()
    if folder.exists() and not folder.is_dir():
        raise RunFolderError(errno.ENOTDIR, f"{folder} exists and is not a folder -- choose "
                             "another --out folder")
    if folder.is_dir() and not _unfinished(folder) and any(c.name != LOCK_NAME for c in folder.iterdir()):
        raise _not_empty(folder)  # refused before anything is written into it
    try:
        folder.mkdir(parents=True, exist_ok=True)
        lock = acquire_run_lock(folder)
    except RunBusyError as error:
        raise RunFolderError(error.errno, error.strerror) from None
    except OSError as error:
        raise _explain(error, folder, "creating the run folder") from error
    try:
        _claim(folder, lock, resume, identity)
        lock.write(identity)
        atomic_write_text(folder / IN_PROGRESS_MARKER, f"pid {os.getpid()}\n")
    except BaseException as error:
        lock.release(finished=not lock.previous)  # a lock file this call created goes again
        if isinstance(error, OSError) and not isinstance(error, RunFolderError):
            raise _explain(error, folder, "creating the run folder") from error
        raise
    _HELD_LOCKS[str(folder)] = lock
    return folder


def _unfinished(folder: pathlib.Path) -> bool:
    return (folder / IN_PROGRESS_MARKER).exists() and not (folder / "manifest.json").exists()


def _not_empty(folder: pathlib.Path) -> RunFolderError:
    return RunFolderError(errno.EEXIST, f"{folder} exists and is not empty -- choose a new "
                          "folder; downcore never overwrites a run")


def _claim(folder: pathlib.Path, lock: RunLock, resume: bool, identity: dict[str, Any] | None) -> None:
    """Refuse a folder with content unless it is a resumable unfinished run of the same
    config; clear its partial content then (the lock and the marker stay)."""
    entries = [child for child in folder.iterdir() if child.name != LOCK_NAME]
    if not entries:
        return
    if not _unfinished(folder):
        raise _not_empty(folder)
    if not resume:
        raise RunFolderError(errno.EEXIST, f"{folder} holds an unfinished run whose process is "
                             f"gone ({describe_owner(lock.previous)}) -- add --resume to finish it, "
                             "reusing the work already done, or choose a new folder")
    recorded = {key: (lock.previous or {}).get(key) for key in ("config", "config_sha256")}
    given = {key: (identity or {}).get(key) for key in recorded}
    if all(recorded.values()) and all(given.values()) and recorded != given:
        what = "another config file" if recorded["config"] != given["config"] else "a changed config"
        raise RunFolderError(errno.EEXIST, f"{folder} holds an unfinished run of {recorded['config']} "
                             f"(sha256 {recorded['config_sha256'][:12]}); this resume gives {what} "
                             f"({given['config']}, sha256 {given['config_sha256'][:12]}) -- resume "
                             "with the config the run was started with, or choose a new folder")
    for child in entries:
        if child.name == IN_PROGRESS_MARKER:
            continue
        shutil.rmtree(child) if child.is_dir() and not child.is_symlink() else child.unlink()


def release_run_folder(folder: str | os.PathLike[str], finished: bool) -> None:
    """Give up the run lock of a folder made by :func:`create_run_folder` in this process.

    ``finished``: the run is complete (its manifest is written); the in-progress marker and
    the lock record are removed. Otherwise both stay, so that ``--resume`` can finish it.
    """
    key = str(pathlib.Path(folder).expanduser().resolve())
    lock = _HELD_LOCKS.pop(key, None)
    if finished:
        (pathlib.Path(key) / IN_PROGRESS_MARKER).unlink(missing_ok=True)
    if lock is not None:
        lock.release(finished)


def ensure_writable_folder(path: str | os.PathLike[str], what: str) -> pathlib.Path:
    """Create ``path`` if needed and prove that a file can be written in it (a probe file is
    created and removed), so that a run stops at once, before anything is computed.

    Parameters
    ----------
    path : path-like
        The folder.
    what : str
        How the user names it in the message, e.g. ``"the work store (--cache-dir)"``.

    Raises
    ------
    RunFolderError
        With one message naming the folder, the reason and the fix.
    """
    folder = pathlib.Path(path).expanduser().resolve()
    try:
        folder.mkdir(parents=True, exist_ok=True)
        handle, probe = tempfile.mkstemp(prefix=".downcore-probe-", dir=folder)
        os.close(handle)
        os.unlink(probe)
    except OSError as error:
        reason = {errno.EROFS: "it is on a read-only file system", errno.EACCES: "permission denied",
                  errno.EPERM: "permission denied", errno.ENOTDIR: "a file stands where a folder belongs",
                  errno.ENOSPC: "the disk is full"}.get(error.errno or 0, error.strerror or str(error))
        raise RunFolderError(error.errno or 0, f"{what} {folder} cannot be written ({reason}) -- "
                             "give a folder you can write to (or fix its permissions); nothing "
                             "was run") from error
    return folder


def _fsync_dir(folder: pathlib.Path) -> None:
    with contextlib.suppress(OSError):
        fd = os.open(folder, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)


def _temp_name(path: pathlib.Path) -> pathlib.Path:
    return path.with_name(f".{path.name}.{os.getpid()}-{uuid.uuid4().hex[:8]}.tmp")


def atomic_write_bytes(path: str | os.PathLike[str], data: bytes, sync_folder: bool = True) -> pathlib.Path:
    """Write ``data`` to ``path`` atomically (temporary file in the same folder, fsync, rename).

    ``sync_folder=False`` skips the fsync of the folder after the rename; use it for files
    written into a staging folder that :func:`publish_folder` will sync as a whole.

    Raises
    ------
    RunFolderError
        On a full disk, a permission problem or any other OS error; the temporary file is
        removed and ``path`` is left as it was.
    """
    target = pathlib.Path(path)
    temp = _temp_name(target)
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        with open(temp, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(temp, target)
    except OSError as error:
        with contextlib.suppress(OSError):
            temp.unlink()
        if isinstance(error, RunFolderError):
            raise
        raise _explain(error, target, "writing") from error
    if sync_folder:
        _fsync_dir(target.parent)
    return target


def atomic_write_text(path: str | os.PathLike[str], text: str) -> pathlib.Path:
    """Write UTF-8 text atomically (see :func:`atomic_write_bytes`)."""
    return atomic_write_bytes(path, text.encode("utf-8"))


def json_text(obj: Any) -> str:
    """Canonical JSON: sorted keys, two-space indent, trailing newline."""
    return json.dumps(obj, indent=2, sort_keys=True, ensure_ascii=False, default=str) + "\n"


def atomic_write_json(path: str | os.PathLike[str], obj: Any) -> pathlib.Path:
    """Write ``obj`` as canonical JSON atomically."""
    return atomic_write_text(path, json_text(obj))


def parquet_bytes(table: pd.DataFrame) -> bytes:
    """Serialise a DataFrame to Parquet bytes with downcore's fixed settings.

    The pandas index is dropped (reset it first if it carries data) and all schema metadata
    is removed, so the bytes depend only on the column names, types and values (and on the
    pyarrow version, which the manifest records).
    """
    if not isinstance(table, pd.DataFrame):
        raise TypeError(f"expected a pandas DataFrame, got {type(table).__name__}")
    arrow = pa.Table.from_pandas(table, preserve_index=False).replace_schema_metadata(None)
    buffer = io.BytesIO()
    pq.write_table(arrow, buffer, **PARQUET_OPTIONS)
    return buffer.getvalue()


def atomic_write_parquet(path: str | os.PathLike[str], table: pd.DataFrame,
                         sync_folder: bool = True) -> pathlib.Path:
    """Write a DataFrame as deterministic Parquet, atomically."""
    return atomic_write_bytes(path, parquet_bytes(table), sync_folder)


def read_parquet(path: str | os.PathLike[str]) -> pd.DataFrame:
    """Read a Parquet file written by :func:`atomic_write_parquet`."""
    return pq.read_table(path).to_pandas()


def atomic_copy(source: str | os.PathLike[str], target: str | os.PathLike[str],
                sync_folder: bool = True) -> pathlib.Path:
    """Copy a file atomically (temporary name in the target folder, fsync, rename)."""
    return atomic_write_bytes(target, pathlib.Path(source).read_bytes(), sync_folder)


def link_or_copy(source: str | os.PathLike[str], target: str | os.PathLike[str]) -> pathlib.Path:
    """Hard-link a finished, read-only file into a staging folder (no bytes copied); copy it
    atomically when a link is impossible (another file system, no permission)."""
    try:
        os.link(source, target)
        return pathlib.Path(target)
    except OSError:
        return atomic_copy(source, target, sync_folder=False)


@contextlib.contextmanager
def staging_folder(parent: str | os.PathLike[str], name: str) -> Iterator[pathlib.Path]:
    """A hidden temporary folder next to ``parent/name``, removed if the block fails."""
    parent_path = pathlib.Path(parent)
    try:
        parent_path.mkdir(parents=True, exist_ok=True)
        temp = pathlib.Path(tempfile.mkdtemp(prefix=f".{name}.", suffix=".tmp", dir=parent_path))
    except OSError as error:
        raise _explain(error, parent_path / name, "creating a folder for") from error
    try:
        yield temp
    except BaseException:
        shutil.rmtree(temp, ignore_errors=True)
        raise


def publish_folder(staged: pathlib.Path, target: str | os.PathLike[str]) -> pathlib.Path:
    """Rename a completed staging folder to its final name.

    If ``target`` already exists (another process published the same content first), the
    staged copy is discarded and the existing folder is kept.
    """
    final = pathlib.Path(target)
    _fsync_dir(staged)
    try:
        os.rename(staged, final)
    except OSError as error:
        if error.errno in (errno.EEXIST, errno.ENOTEMPTY) or final.is_dir():
            shutil.rmtree(staged, ignore_errors=True)
        else:
            shutil.rmtree(staged, ignore_errors=True)
            raise _explain(error, final, "publishing") from error
    _fsync_dir(final.parent)
    return final


def sha256_bytes(data: bytes) -> str:
    """Hex SHA-256 of bytes."""
    return hashlib.sha256(data).hexdigest()


def sha256_file(path: str | os.PathLike[str], chunk_bytes: int = 1 << 20) -> str:
    """Hex SHA-256 of a file's content, read in chunks."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for chunk in iter(lambda: handle.read(chunk_bytes), b""):
            digest.update(chunk)
    return digest.hexdigest()
