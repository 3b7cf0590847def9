"""A run with nothing to compute: its folder assembled straight from the work store.

When every stage of every core (and the run-level stages) is already in the work store, a
run has no work to orchestrate: its run folder is the store's finished entries hard-linked
into place. :func:`assemble_from_store` walks the very same driver as the archive flow
(:func:`pipelines.flows.archive.collect_run`), but where the flow would submit a task it stops
(:class:`WorkNeeded`) before anything is written; only when the whole walk succeeds are the
core folders published. So the outputs are those of the flow, byte for byte, and the run does
not wait ~3.5 s for a temporary Prefect server it would not use. Any stage to compute (a new
input, a changed setting, a core that failed last time) and the run goes through Prefect as
usual.
"""

from __future__ import annotations

from typing import Any

from pipelines.flows.archive import _Driver, _Finished, _Silent, collect_run
from pipelines.flows.plan import RunPlan
from pipelines.flows.store import WorkStore
from pipelines.flows.tasks import publish_core_folder

__all__ = ["WorkNeeded", "assemble_from_store", "NO_ORCHESTRATION_NOTE"]

#: the run-level note of a run assembled from the work store
NO_ORCHESTRATION_NOTE = ("every stage was found in the work store: the run folder was assembled "
                         "from it without starting Prefect (nothing to compute)")


class WorkNeeded(Exception):
    """A stage is not in the work store (``str(error)`` names it): the run needs Prefect."""


class _StoreOnlyDriver(_Driver):
    """The archive flow's driver with every submission refused; a core folder's publication
    is deferred until the walk has succeeded."""

    def __init__(self, plan: RunPlan, run_dir: str, store: WorkStore, observer: Any):
        super().__init__(plan, run_dir, store, False, observer)
        self.publications: list[dict] = []

    def _send(self, track: Any, stage: str, task, kwargs: dict) -> None:
        if stage != "outputs":
            raise WorkNeeded(stage)
        self.publications.append(kwargs)
        self.done.put((track, stage, _Finished({"files": [], "known_hashes": {}})))

    def _flush_chains(self) -> None:  # pragma: no cover - chains are built for Dask runs only
        raise WorkNeeded("chain")


def _refuse(driver: _Driver, stage: str, entries: dict) -> Any:
    raise WorkNeeded(stage)


def assemble_from_store(plan: RunPlan, run_dir: str, cache_dir: str, observer: Any = None) -> dict | None:
    """The archive flow's result for a run whose every stage is in the work store, with its
    core folders published in ``run_dir``; ``None`` (nothing written) when any stage must be
    computed.

    Parameters
    ----------
    plan : RunPlan
        The run plan.
    run_dir, cache_dir : str
        The run folder (created, locked by the caller) and the work store.
    observer : progress observer, optional
        Told about the cores as the flow would tell it.
    """
    driver = _StoreOnlyDriver(plan, run_dir, WorkStore(cache_dir), observer or _Silent())
    try:
        result = collect_run(driver, _refuse)
    except WorkNeeded:
        return None
    for kwargs in driver.publications:
        published = publish_core_folder(kwargs["run_dir"], kwargs["label"], kwargs["entries"], kwargs["log_text"])
        result["known_hashes"].update(published["known_hashes"])
    result["notes"].append(NO_ORCHESTRATION_NOTE)
    return result
