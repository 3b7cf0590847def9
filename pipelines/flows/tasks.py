"""Prefect tasks: one per stage of the stage table (:mod:`pipelines.flows.stage_table`), one
that chains a core's stages after ingest (:mod:`pipelines.flows.chain`) and one that publishes
a core's folder in the run folder.

Tasks are thin: each calls one runner of :mod:`pipelines.flows.stages`. Caching is done by
the runners' content-addressed work store (keys = content hashes of inputs, settings and the
science code), not by Prefect's result store, because the results are files on disk and a
cache hit must also check that those files still exist; Prefect's own cache is therefore off
(``NO_CACHE``) and no result is persisted by Prefect.

A failed stage raises :class:`StageFailed` carrying a plain message (picklable, so it crosses
Dask workers intact); a skipped stage returns ``{"skipped": reason}``. A stage task may be
given the futures of its upstream stages: one whose needed input did not finish returns
:data:`pipelines.flows.stage_table.NOT_RUN` without running anything.
"""

from __future__ import annotations

import pathlib
import time
from typing import Any

from prefect import task
from prefect.cache_policies import NO_CACHE

from pipelines.flows import science_pool, stages
from pipelines.flows.chain import run_core_chain, stage_outcome
from pipelines.flows.plan import RunPlan
from pipelines.flows.stage_table import NOT_RUN, STAGES, take_inputs
from pipelines.flows.store import WorkStore
from pipelines.runfolder import atomic_write_bytes, link_or_copy, publish_folder, staging_folder

__all__ = ["StageFailed", "STAGE_TASKS", "core_chain_task", "outputs_task"]

_OPTIONS: dict[str, Any] = {"cache_policy": NO_CACHE, "persist_result": False, "retries": 0,
                            "log_prints": False}


class StageFailed(RuntimeError):
    """A stage failed for one core; ``str(error)`` is the message shown in the summary."""


def _as_task_result(outcome: dict) -> dict:
    """A stage's outcome (:func:`pipelines.flows.chain.stage_outcome`) as its task's result:
    a failure raises :class:`StageFailed`, so that Prefect records the task run as failed."""
    if "failed" in outcome:
        raise StageFailed(outcome["failed"])
    return outcome


def _stage_task(name: str):
    """The Prefect task of stage ``name`` (task runs are named ``<stage>[<core or set>]``); its
    work runs in a worker process when the run has a science pool
    (:mod:`pipelines.flows.science_pool`) and the stage is one of its :data:`POOL_STAGES`."""
    in_pool = name in science_pool.POOL_STAGES

    def run(plan: RunPlan, label: str, entries: dict, store: WorkStore, recompute: bool = False) -> dict:
        if take_inputs(STAGES[name], entries) is None:
            return dict(NOT_RUN)  # an input was skipped or failed: nothing to run (nor to send)
        pool = science_pool.active_pool() if in_pool else None
        if pool is not None:
            return _as_task_result(pool.run_stage(name, plan, entries, store, recompute))
        return _as_task_result(stage_outcome(name, plan, entries, store, recompute))

    run.__name__ = run.__qualname__ = f"{name}_task"
    run.__doc__ = f"Stage {name!r} of :data:`pipelines.flows.stage_table.STAGES`."
    return task(name=name, task_run_name=f"{name}[{{label}}]", **_OPTIONS)(run)


#: stage name -> its Prefect task, built from the stage table
STAGE_TASKS = {name: _stage_task(name) for name in STAGES}


@task(name="core-chain", task_run_name="core-chain[{label}]", **_OPTIONS)
def core_chain_task(plan: RunPlan, label: str, chains: list[tuple[tuple[str, ...], dict]], store: WorkStore,
                    recompute: bool = False) -> list[list[tuple[str, dict]]]:
    """The stages after ingest of one core (threads) or a few (Dask) as one task
    (:mod:`pipelines.flows.chain`): each task run's orchestration costs CPU that the science
    needs. One chain per core, failures isolated; ``chains`` holds each core's stages to run
    and its entries (its finished stages, folder and the training sets). With a science pool
    each chain is one call of a worker process."""
    pool = science_pool.active_pool()
    if pool is not None:
        return [pool.run_chain(plan, stages_left, entries, store, recompute) for stages_left, entries in chains]
    return [run_core_chain(plan, stages_left, entries, store, recompute) for stages_left, entries in chains]


def publish_core_folder(run_dir: str, folder_name: str, entries: list[dict], log_text: str) -> dict:
    """Hard-link (or copy) a core's tables from the work store into ``run_dir/<folder_name>/``
    and write its log; the folder appears (one rename) only when complete.

    Returns the files written and, for linked files, ``(inode, size, sha256)`` so that the
    manifest need not read them again.
    """
    start = time.perf_counter()
    root = pathlib.Path(run_dir)
    known: dict[str, tuple[int, int, str]] = {}
    with staging_folder(root, folder_name) as staged:
        written = []
        for entry in entries:
            digests = entry.get("sha256", {})
            for name, path in sorted(entry.get("paths", {}).items()):
                if name.endswith((".parquet", ".csv")):  # tables and their stage-written CSV copies
                    target = link_or_copy(path, staged / name)
                    written.append(name)
                    file_name = pathlib.Path(path).name
                    if file_name in digests:
                        info = target.stat()
                        known[f"{folder_name}/{name}"] = (info.st_ino, info.st_size, digests[file_name])
        atomic_write_bytes(staged / "log.txt", log_text.encode("utf-8"), sync_folder=False)
        staged.chmod(0o755)
        publish_folder(staged, root / folder_name)
    return {"files": sorted(written), "known_hashes": known,
            "seconds": round(time.perf_counter() - start, 4)}


@task(name="outputs", task_run_name="outputs[{label}]", **_OPTIONS)
def outputs_task(run_dir: str, label: str, folders: list[tuple[str, list[dict], str]]) -> list[dict]:
    """Publish the folders of one or a few cores in the run folder; ``folders`` holds each
    core's ``(folder name, entries, log text)``. One outcome per core, failures isolated:
    its published files (:func:`publish_core_folder`) or ``{"failed": message}``."""
    stages.pin_blas_threads()
    published = []
    for folder_name, entries, text in folders:
        try:
            published.append(publish_core_folder(run_dir, folder_name, entries, text))
        except Exception as error:  # noqa: BLE001 - the other cores' folders stay valid
            published.append({"failed": stages.problem_text(error)})
    return published
