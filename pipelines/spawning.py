"""Starting helper processes: imports paid once, and the user's main script never run again.

downcore's helper processes (the science workers, the report helper) need the science and the
drawing imported, ~1.5 s of CPU per process when each imports them itself. Where the platform
has it, they are started by one *fork server* (:func:`helper_context`): a process that imports
:data:`PRELOADED` once, while the run reads its config, and then forks every helper from
itself, so each starts with everything imported. The fork server is single-threaded (nothing
runs in it but the imports), so forking it is safe; it exits with the process that started it.
Elsewhere the helpers are spawned, as before.

``multiprocessing`` imports the parent's main script in every child it starts (as
``__mp_main__``), so a user's script without a ``__main__`` guard would start its run a second
time, and a large script costs its imports again: :func:`main_script_not_rerun` hides it while
helpers are started.
"""

from __future__ import annotations

import contextlib
import multiprocessing
import os
import sys
import threading
from typing import Any, Iterator

__all__ = ["main_script_not_rerun", "helper_context", "PRELOADED", "START_METHOD_ENV"]

#: modules the fork server imports once for every helper: the stages' science and the report
PRELOADED = ("pipelines.flows.stage_table", "pipelines.ingest", "proxies.calibration.stage",
             "proxies.chronology.stage", "proxies.events.stage", "proxies.reconstruction.stage",
             "pipelines.report.build", "pipelines.report.exports")

#: environment variable: ``spawn`` to spawn every helper (each importing for itself)
START_METHOD_ENV = "DOWNCORE_HELPER_START"

_STARTED = threading.Lock()


def _source_root() -> str:
    """The folder holding this ``pipelines`` package (what the fork server must import)."""
    return os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def helper_context() -> Any:
    """The ``multiprocessing`` context for downcore's helper processes: the preloading fork
    server (started on first use) where available, else spawn (also with
    ``$DOWNCORE_HELPER_START=spawn``)."""
    if (os.environ.get(START_METHOD_ENV, "").strip() == "spawn"
            or "forkserver" not in multiprocessing.get_all_start_methods()):
        return multiprocessing.get_context("spawn")
    context = multiprocessing.get_context("forkserver")
    with _STARTED:
        _start_fork_server(context)
    return context


def _start_fork_server(context: Any) -> None:
    """Start the fork server now (a no-op when it runs), importing :data:`PRELOADED` from this
    very source tree: the fork server does not take this process's ``sys.path``, so the tree
    goes first on its ``PYTHONPATH`` (a helper must never run another copy of downcore)."""
    from multiprocessing import forkserver

    context.set_forkserver_preload(list(PRELOADED))
    saved = os.environ.get("PYTHONPATH")
    os.environ["PYTHONPATH"] = os.pathsep.join([_source_root()] + ([saved] if saved else []))
    try:
        with main_script_not_rerun():
            forkserver.ensure_running()
    finally:
        if saved is None:
            del os.environ["PYTHONPATH"]
        else:
            os.environ["PYTHONPATH"] = saved


@contextlib.contextmanager
def main_script_not_rerun() -> Iterator[None]:
    """While processes are spawned: hide the main script's ``__file__`` and ``__spec__`` from
    multiprocessing (restored afterwards)."""
    main = sys.modules.get("__main__")
    saved = {name: getattr(main, name) for name in ("__file__", "__spec__") if hasattr(main, name)}
    try:
        for name in saved:
            if name == "__spec__":
                main.__spec__ = None
            else:
                delattr(main, name)
        yield
    finally:
        for name, value in saved.items():
            setattr(main, name, value)
