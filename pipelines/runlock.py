"""The run lock: one live run per run folder, and a record of who started it.

A run folder holds ``.downcore-lock`` from the moment the run starts until it is complete.
The file records the owner (process id, host name, start time in UTC) and what the run was
started with (the run config's path and the SHA-256 of its text). While the owner is alive
it also holds an exclusive operating-system lock on that file (``flock`` on POSIX; the
kernel drops it when the process ends in any way, ``kill -9`` included), so a second
command into the same folder learns that a run *is going*, and ``--resume`` refuses to
touch a live run. When the owner has died, the record stays behind: ``--resume`` reads it
to refuse a resume with another config than the one the run was started with.

On a platform without ``fcntl`` (Windows) liveness is judged from the recorded process id
instead. A record written on another host cannot be judged from here (a shared file system
may not pass locks between hosts), so it is treated as live and the message says how to
clear it.
"""

from __future__ import annotations

import contextlib
import errno
import json
import os
import pathlib
import socket
from dataclasses import dataclass, field
from typing import Any

from pipelines.clock import utc_now

try:  # POSIX
    import fcntl
except ImportError:  # pragma: no cover - Windows
    fcntl = None  # type: ignore[assignment]

__all__ = ["LOCK_NAME", "RunBusyError", "RunLock", "acquire_run_lock", "read_lock_record",
           "run_identity", "describe_owner"]

#: the lock file inside a run folder (hidden: never an output, never hashed)
LOCK_NAME = ".downcore-lock"


class RunBusyError(OSError):
    """Another run is going in the folder (or may be: its host is not this one)."""


def run_identity(config_path: str | os.PathLike[str], config_text: str) -> dict[str, str]:
    """What a resume must match: the run config's absolute path and the SHA-256 of its text."""
    import hashlib

    return {"config": str(pathlib.Path(config_path).resolve()),
            "config_sha256": hashlib.sha256(config_text.encode("utf-8")).hexdigest()}


def describe_owner(record: dict[str, Any] | None) -> str:
    """``pid 123 on host lab-7, started 2026-12-01T10:00:00Z`` (or what is known of it)."""
    if not record:
        return "owner not yet recorded"
    return (f"pid {record.get('pid', '?')} on host {record.get('host', '?')}, "
            f"started {record.get('started_utc', '?')}")


def read_lock_record(folder: str | os.PathLike[str]) -> dict[str, Any] | None:
    """The record in ``folder/.downcore-lock``, or ``None`` when there is none (or it is empty
    or unreadable, e.g. written by a run that died while writing it)."""
    try:
        text = (pathlib.Path(folder) / LOCK_NAME).read_text(encoding="utf-8")
        record = json.loads(text)
    except (OSError, ValueError):
        return None
    return record if isinstance(record, dict) else None


def _pid_alive(pid: int) -> bool:
    """Whether a process with this id exists on this host."""
    if os.name == "nt":  # pragma: no cover - Windows
        import ctypes

        handle = ctypes.windll.kernel32.OpenProcess(0x1000, False, pid)  # QUERY_LIMITED_INFORMATION
        if not handle:
            return False
        code = ctypes.c_ulong()
        ctypes.windll.kernel32.GetExitCodeProcess(handle, ctypes.byref(code))
        ctypes.windll.kernel32.CloseHandle(handle)
        return code.value == 259  # STILL_ACTIVE
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


@dataclass
class RunLock:
    """A held run lock (see the module docstring)."""

    folder: pathlib.Path
    fd: int
    #: the record an earlier owner left (it is gone; ``None`` when the file was new or empty)
    previous: dict[str, Any] | None = None
    record: dict[str, Any] = field(default_factory=dict)

    @property
    def path(self) -> pathlib.Path:
        return self.folder / LOCK_NAME

    def write(self, identity: dict[str, Any] | None = None) -> None:
        """Record this process as the owner (and what the run was started with)."""
        self.record = {"pid": os.getpid(), "host": socket.gethostname(), "state": "running",
                       "started_utc": utc_now(),
                       **(identity or {})}
        self._rewrite(self.record)

    def _rewrite(self, record: dict[str, Any]) -> None:
        data = (json.dumps(record, indent=2, sort_keys=True) + "\n").encode("utf-8")
        os.lseek(self.fd, 0, os.SEEK_SET)
        os.ftruncate(self.fd, 0)
        os.write(self.fd, data)
        os.fsync(self.fd)

    def release(self, finished: bool) -> None:
        """Give the lock up. ``finished``: the run is complete and the record is removed;
        otherwise it stays (state ``stopped``) so that a resume can check its config."""
        if self.fd < 0:
            return
        try:
            if finished:
                with contextlib.suppress(FileNotFoundError):
                    self.path.unlink()
            elif self.record:
                with contextlib.suppress(OSError):
                    self._rewrite({**self.record, "state": "stopped"})
        finally:
            os.close(self.fd)  # drops the flock
            self.fd = -1


def _busy(folder: pathlib.Path, record: dict[str, Any] | None, other_host: bool) -> RunBusyError:
    lock = folder / LOCK_NAME
    if other_host:
        text = (f"{folder} belongs to a run started on another host ({describe_owner(record)}); "
                "downcore cannot see from here whether it is still going -- if it surely is not, "
                f"delete {lock} and add --resume to finish it; otherwise choose another --out folder")
    else:
        text = (f"a run is going in {folder} ({describe_owner(record)}) -- wait for it to finish "
                "or choose another --out folder; nothing was changed")
    return RunBusyError(errno.EBUSY, text)


def _open_locked(path: pathlib.Path) -> int | None:
    """Open (creating) ``path`` and take its exclusive lock; ``None`` when another process
    holds it. Retries when the file was replaced between the open and the lock."""
    while True:
        fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o644)
        if fcntl is None:  # pragma: no cover - Windows: no kernel lock, judged from the record
            return fd
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError as error:
            os.close(fd)
            if error.errno in (errno.EAGAIN, errno.EACCES, errno.EWOULDBLOCK):
                return None
            raise
        try:
            same = os.fstat(fd).st_ino == os.stat(path).st_ino
        except FileNotFoundError:
            same = False
        if same:
            return fd
        os.close(fd)  # a finishing run removed the file under us: lock the new one


def acquire_run_lock(folder: str | os.PathLike[str]) -> RunLock:
    """Take the lock of an existing folder.

    Returns
    -------
    RunLock
        Held by this process; ``previous`` is the record of an earlier owner that is gone.
        Call :meth:`RunLock.write` to record this process, :meth:`RunLock.release` at the end.

    Raises
    ------
    RunBusyError
        When a live run holds the folder (or one started on another host left its record).
    """
    folder = pathlib.Path(folder)
    fd = _open_locked(folder / LOCK_NAME)
    if fd is None:
        raise _busy(folder, read_lock_record(folder), other_host=False)
    previous = read_lock_record(folder)
    if previous and previous.get("state") == "running":
        other_host = previous.get("host") != socket.gethostname()
        live_here = fcntl is None and not other_host and _pid_alive(int(previous.get("pid", -1)))
        if other_host or live_here:
            os.close(fd)
            raise _busy(folder, previous, other_host)
    return RunLock(folder=folder, fd=fd, previous=previous)
