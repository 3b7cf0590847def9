"""Where the tasks run: threads (default), an existing Dask cluster, or a local Dask cluster.

Also sets the environment defaults that keep Prefect offline and quiet (see
../shared/PREFECT.md), never overriding a value the user has set.
"""

from __future__ import annotations

import contextlib
import os
import pathlib
from dataclasses import dataclass
from typing import Any, Iterator

__all__ = ["ENV_DEFAULTS", "apply_environment_defaults", "ExecutorChoice", "task_runner_for",
           "prefect_run_settings"]

#: environment defaults for a quiet, offline run (a user's own values always win)
ENV_DEFAULTS = {
    "PREFECT_SERVER_ANALYTICS_ENABLED": "false",
    "DO_NOT_TRACK": "1",
    "PREFECT_LOGGING_LEVEL": "WARNING",
    "PREFECT_SERVER_EPHEMERAL_STARTUP_TIMEOUT_SECONDS": "120",
    "PREFECT_SERVER_UI_ENABLED": "false",
    "DASK_LOGGING__DISTRIBUTED": "warning",
    "OMP_NUM_THREADS": "1",
    "OPENBLAS_NUM_THREADS": "1",
    "MKL_NUM_THREADS": "1",
}


@dataclass(frozen=True)
class ExecutorChoice:
    """How to run the tasks.

    Attributes
    ----------
    workers : int
        Threads of the default runner (the concurrency limit), or workers of a local Dask
        cluster.
    dask_address : str or None
        ``tcp://HOST:PORT`` of a running Dask scheduler.
    dask_local : bool
        Start a local Dask cluster of ``workers`` single-threaded worker processes.
    """

    workers: int = 2
    dask_address: str | None = None
    dask_local: bool = False

    def inline_stages(self) -> tuple[str, ...]:
        """Light stages run in the flow's process (when their inputs are known there): on
        Dask a submitted task costs ~60-80 ms, more than ingest takes (threads: none). A
        core's folder is always published in the flow's process."""
        return ("ingest",) if (self.dask_address or self.dask_local) else ()

    def batch_core_chains(self) -> bool:
        """On Dask, a task holds a few cores' chains of stages (fewer task runs: the
        orchestration of each costs CPU that the workers need); on threads, one core's."""
        return bool(self.dask_address or self.dask_local)

    def describe(self) -> dict[str, Any]:
        if self.dask_address:
            return {"runner": "dask", "address": self.dask_address}
        if self.dask_local:
            return {"runner": "dask-local", "workers": self.workers}
        return {"runner": "threads", "workers": self.workers}


def apply_environment_defaults() -> dict[str, str]:
    """Set :data:`ENV_DEFAULTS` where unset (call before importing Prefect); return what was set."""
    applied = {}
    for key, value in ENV_DEFAULTS.items():
        if key not in os.environ:
            os.environ[key] = value
            applied[key] = value
    return applied


def task_runner_for(choice: ExecutorChoice, scratch: str | os.PathLike[str]):
    """The Prefect task runner for ``choice`` (``scratch``: a folder for Dask's spill files)."""
    if choice.dask_address:
        from prefect_dask import DaskTaskRunner

        return DaskTaskRunner(address=choice.dask_address)
    if choice.dask_local:
        from prefect_dask import DaskTaskRunner

        folder = pathlib.Path(scratch)
        folder.mkdir(parents=True, exist_ok=True)
        return DaskTaskRunner(cluster_kwargs={"n_workers": int(choice.workers), "threads_per_worker": 1,
                                              "processes": True, "dashboard_address": ":0",
                                              "local_directory": str(folder)})
    from prefect.task_runners import ThreadPoolTaskRunner

    return ThreadPoolTaskRunner(max_workers=max(1, int(choice.workers)))


def _shared_api_url() -> str | None:
    """The API URL that local Dask workers should use: the user's, the test harness's, or the
    temporary server this process starts (so workers do not each start their own)."""
    from prefect.settings import PREFECT_API_URL

    url = PREFECT_API_URL.value()
    if url:
        return url
    from prefect.server.api.server import SubprocessASGIServer

    server = SubprocessASGIServer()
    server.start()
    return server.api_url


@contextlib.contextmanager
def prefect_run_settings(choice: ExecutorChoice, api_url: str | None = None) -> Iterator[None]:
    """Settings for one run: no flow heartbeat (it costs ~1 s per flow, measured), the API of
    downcore's own temporary server when one was started (``api_url``), and for a local Dask
    cluster a shared API URL exported to the worker processes."""
    from prefect.settings import PREFECT_API_URL, PREFECT_FLOWS_HEARTBEAT_FREQUENCY, temporary_settings

    updates: dict[Any, Any] = {PREFECT_FLOWS_HEARTBEAT_FREQUENCY: None}
    if api_url:
        updates[PREFECT_API_URL] = api_url
    exported = None
    if choice.dask_local:
        url = api_url or _shared_api_url()
        if url and not os.environ.get("PREFECT_API_URL"):
            os.environ["PREFECT_API_URL"] = exported = url
            updates[PREFECT_API_URL] = url
    try:
        with temporary_settings(updates=updates):
            yield
    finally:
        if exported is not None and os.environ.get("PREFECT_API_URL") == exported:
            del os.environ["PREFECT_API_URL"]
