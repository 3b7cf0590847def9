"""A run with nothing to compute: its folder assembled straight from the work store.

When every stage of every core (and the run-level stages) is already in the work store, a
run has no work to orchestrate: its run folder is the store's finished entries hard-linked
into place. :func:`assemble_from_store` walks the cores exactly as the archive flow does
(:func:`pipelines.flows.archive.run_cores` and ``collect_run``, with a submitter that looks
stages up in the work store), but where the flow would submit or run a task it stops
(:class:`WorkNeeded`) before anything is written; only when the whole walk succeeds are the
core folders published. So the outputs are those of the flow, byte for byte, and the run does
not wait ~3.5 s for a temporary Prefect server it would not use. Any stage to compute (a new
input, a changed setting, a core that failed last time) and the run goes through Prefect as
usual.
"""

from __future__ import annotations

from typing import Any

from pipelines.flows.archive import Submitter, collect_run, run_cores
from pipelines.flows.plan import RunPlan
from pipelines.flows.store import WorkStore
from pipelines.flows.tasks import publish_core_folder
from pipelines.flows.tracks import CoreTrack, log_text, published_entries

__all__ = ["WorkNeeded", "assemble_from_store", "NO_ORCHESTRATION_NOTE"]

#: the run-level note of a run assembled from the work store
NO_ORCHESTRATION_NOTE = ("every stage was found in the work store: the run folder was assembled "
                         "from it without starting Prefect (nothing to compute)")


class WorkNeeded(Exception):
    """A stage is not in the work store (``str(error)`` names it): the run needs Prefect."""


class _StoreOnly(Submitter):
    """The archive flow's submitter with every submission refused; a core folder's
    publication is deferred until the walk has succeeded."""

    def __init__(self, plan: RunPlan, run_dir: str, store: WorkStore):
        super().__init__(plan, run_dir, store)
        self.publications: list[tuple[str, list[dict], str]] = []

    def _run(self, stage: str, label: str, entries: dict, inline: bool) -> Any:
        raise WorkNeeded(f"{stage}[{label}]")

    def chain_cores(self, label: str, chains: list[dict]) -> Any:  # pragma: no cover - Dask runs only
        raise WorkNeeded(f"chain[{label}]")

    def publish(self, tracks: list[CoreTrack]) -> list[dict]:
        self.publications.extend((track.name, published_entries(track), log_text(track)) for track in tracks)
        return [{"files": [], "known_hashes": {}} for _ in tracks]

    def run_level(self, stage: str, entries: dict) -> Any:
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
    submitter = _StoreOnly(plan, run_dir, WorkStore(cache_dir))
    try:
        result = collect_run(submitter, run_cores(submitter, observer))
    except WorkNeeded:
        return None
    for name, entries, text in submitter.publications:
        published = publish_core_folder(run_dir, name, entries, text)
        result["known_hashes"].update(published["known_hashes"])
    result["notes"].append(NO_ORCHESTRATION_NOTE)
    return result
