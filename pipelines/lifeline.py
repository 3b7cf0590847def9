"""Child processes that never outlive downcore, even after ``kill -9``.

A process killed with SIGKILL cannot clean up, and its children (the temporary Prefect server)
would keep running. :func:`spawn_tied_to_parent` therefore starts the child in a process group
of its own and, beside it, a small watcher process (this file run as a script: standard
library only, ~20 ms to start) that polls every quarter second whether downcore is still its
parent. When downcore is gone, however it ended, the watcher ends the child's whole process
group (SIGTERM, then SIGKILL after a grace period) and exits; it also exits when the group
has ended on its own. The watcher runs in a session of its own too, so killing downcore's
process group leaves it alive to do its job.

POSIX only (Linux, macOS). On Windows the child is started as before and is not watched.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from typing import Any, Sequence

__all__ = ["spawn_tied_to_parent", "watch_parent"]

#: watchers started by this process (kept so that their Popen objects are never collected)
_WATCHERS: list[subprocess.Popen] = []
POLL_SECONDS = 0.25
GRACE_SECONDS = 5.0


def spawn_tied_to_parent(args: Sequence[str], **popen_kwargs: Any) -> subprocess.Popen:
    """``subprocess.Popen(args, **popen_kwargs)`` whose process group is ended when this
    process ends (see the module docstring)."""
    if os.name != "posix":  # pragma: no cover - Windows: no process groups to watch
        return subprocess.Popen(args, **popen_kwargs)
    child = subprocess.Popen(args, start_new_session=True, **popen_kwargs)
    watcher = subprocess.Popen([sys.executable, "-I", "-S", os.path.abspath(__file__), str(os.getpid()),
                                str(child.pid)], start_new_session=True, stdin=subprocess.DEVNULL,
                               stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, close_fds=True)
    _WATCHERS.append(watcher)
    return child


def _group_alive(group: int) -> bool:
    try:
        os.killpg(group, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def _end_group(group: int) -> None:
    for sig, wait_s in ((signal.SIGTERM, GRACE_SECONDS), (signal.SIGKILL, GRACE_SECONDS)):
        try:
            os.killpg(group, sig)
        except ProcessLookupError:
            return
        deadline = time.monotonic() + wait_s
        while time.monotonic() < deadline:
            if not _group_alive(group):
                return
            time.sleep(0.05)


def watch_parent(parent_pid: int, group: int, poll_s: float = POLL_SECONDS) -> None:
    """Return when ``group`` has ended; end it first when ``parent_pid`` stops being this
    process's parent (the parent died and this process was handed to another)."""
    while True:
        if os.getppid() != parent_pid:
            _end_group(group)
            return
        if not _group_alive(group):
            return
        time.sleep(poll_s)


if __name__ == "__main__":  # the watcher: lifeline.py PARENT_PID CHILD_GROUP
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # Ctrl-C is the parent's to handle
    watch_parent(int(sys.argv[1]), int(sys.argv[2]))
