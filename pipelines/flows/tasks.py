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
from typing import Any, Callable

from prefect import task
from prefect.cache_policies import NO_CACHE

from pipelines.flows import science_pool, stages
from pipelines.flows.chain import run_core_chain
from pipelines.flows.plan import RunPlan
from pipelines.flows.stage_table import NOT_RUN, STAGES, call_stage, take_inputs
from pipelines.flows.store import WorkStore
from pipelines.runfolder import atomic_write_bytes, link_or_copy, publish_folder, staging_folder

__all__ = ["StageFailed", "STAGE_TASKS", "core_chain_task", "outputs_task"]

_OPTIONS: dict[str, Any] = {"cache_policy": NO_CACHE, "persist_result": False, "retries": 0,
                            "log_prints": False}


class StageFailed(RuntimeError):
    """A stage failed for one core; ``str(error)`` is the message shown in the summary."""


def _guarded(runner: Callable[..., dict], *args: Any) -> dict:
    stages.pin_blas_threads()
    start = time.perf_counter()
    try:
        return runner(*args)
    except stages.StageSkipped as skipped:
        return {"skipped": str(skipped), "seconds": round(time.perf_counter() - start, 4)}
    except StageFailed:
        raise
    except Exception as error:  # noqa: BLE001 - any failure is isolated to its core
        raise StageFailed(stages.problem_text(error)) from None


def _call_in_worker(name: str, plan: RunPlan, entries: dict, store: WorkStore, recompute: bool) -> dict:
    """:func:`call_stage` in a worker process of the run's science pool (this thread waits)."""
    outcome, value = science_pool.active_pool().run_stage(name, plan, entries, store, recompute)
    if outcome == "skipped":
        raise stages.StageSkipped(value)
    if outcome == "failed":
        raise StageFailed(value)
    return value


def _stage_task(name: str):
    """The Prefect task of stage ``name`` (task runs are named ``<stage>[<core or set>]``); its
    work runs in a worker process when the run has a science pool
    (:mod:`pipelines.flows.science_pool`) and the stage is one of its :data:`POOL_STAGES`."""
    in_pool = name in science_pool.POOL_STAGES

    def run(plan: RunPlan, label: str, entries: dict, store: WorkStore, recompute: bool = False) -> dict:
        if take_inputs(STAGES[name], entries) is None:
            return dict(NOT_RUN)  # an input was skipped or failed: nothing to run (nor to send)
        call = _call_in_worker if in_pool and science_pool.active_pool() is not None else call_stage
        return _guarded(call, name, plan, entries, store, recompute)

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
def outputs_task(run_dir: str, label: str, entries: list[dict], log_text: str) -> dict:
    """Publish one core's folder in the run folder."""
    stages.pin_blas_threads()
    try:
        return publish_core_folder(run_dir, label, entries, log_text)
    except Exception as error:  # noqa: BLE001
        raise StageFailed(stages.problem_text(error)) from None
