"""Inputs read once per process and shared by every stage that takes them.

Every stage of a core takes its :class:`proxies.cores.Core` (chronology, calibration,
reconstruction, the per-sample table), and every core's calibration takes the run's fitted
transfer functions and instrumental series. Read from the work store each time, one Core was
unpickled four times and each fitted transfer function once per core. Here each is read once
per process and handed to every stage that asks for it, keyed on its content hash (the SHA-256
of the pickled result recorded in its work-store entry; for an instrumental series the hash of
its file and its config table), so a changed input is read again and an unchanged one never.

The objects are shared, so no stage may modify them: ``tests/test_shared_inputs.py`` runs
every stage of the demo's cores and checks that each shared object still equals a fresh copy.

The cache is bounded by the bytes it holds (:data:`SHARED_BYTES_MAX`, measured as the size of
the pickled result or of the input file, a fair proxy of the unpickled size): a Core is
8-70 kB, so a 1,000-core archive fits whole; beyond that the least recently used go first.
"""

from __future__ import annotations

import collections
import pathlib
import threading
from typing import Any, Callable

from pipelines.flows.keys import content_key
from pipelines.flows.store import load_object

__all__ = ["SharedObjects", "SHARED", "SHARED_BYTES_MAX", "shared_result", "shared_instrumental"]

#: bytes the per-process cache may hold (pickled or file size of what it holds)
SHARED_BYTES_MAX = 256 * 1024 ** 2


class SharedObjects:
    """A thread-safe, byte-bounded, least-recently-used map: content key -> object.

    Parameters
    ----------
    max_bytes : int
        Bound on the summed sizes of the objects held [bytes]; one object larger than the
        bound is returned but not kept.
    """

    def __init__(self, max_bytes: int = SHARED_BYTES_MAX):
        self.max_bytes = int(max_bytes)
        self._items: collections.OrderedDict[str, tuple[Any, int]] = collections.OrderedDict()
        self._bytes = 0
        self._lock = threading.Lock()
        self.reads = 0  # objects read (cache misses), for tests and profiles

    @property
    def held_bytes(self) -> int:
        return self._bytes

    def __len__(self) -> int:
        return len(self._items)

    def get(self, key: str, size: int, read: Callable[[], Any]) -> Any:
        """The object stored under ``key``, reading it with ``read()`` the first time (two
        threads asking at once may both read; the first stored wins)."""
        with self._lock:
            if key in self._items:
                self._items.move_to_end(key)
                return self._items[key][0]
        value = read()
        with self._lock:
            self.reads += 1
            if key in self._items:
                return self._items[key][0]
            if size <= self.max_bytes:
                self._items[key] = (value, size)
                self._bytes += size
                while self._bytes > self.max_bytes:
                    _, (_, dropped) = self._items.popitem(last=False)
                    self._bytes -= dropped
        return value

    def clear(self) -> None:
        with self._lock:
            self._items.clear()
            self._bytes = 0
            self.reads = 0


#: the process's shared inputs
SHARED = SharedObjects()


def shared_result(entry: dict[str, Any]) -> Any:
    """The pickled result of a finished work-store entry, unpickled once per process
    (keyed on the SHA-256 of its bytes, from the entry); never modify it."""
    path = pathlib.Path(entry["paths"]["result"])
    digest = entry.get("sha256", {}).get(path.name)
    if not digest:
        return load_object(entry)
    return SHARED.get(f"result:{digest}", path.stat().st_size, lambda: load_object(entry))


def shared_instrumental(plan: Any, name: str) -> Any:
    """Instrumental series ``name`` of the run, read and validated once per process (keyed on
    the file's SHA-256 and its ``[instrumental.<name>]`` table); never modify it."""
    from pipelines.auxiliary import read_instrumental

    path, digest = plan.auxiliary["instrumental"][name]
    key = content_key("instrumental", name, digest, plan.config.sections["instrumental"].get(name))
    return SHARED.get(key, pathlib.Path(path).stat().st_size, lambda: read_instrumental(plan.config, name))
