"""Prefect tasks: one per stage of a core, one per training set, one for the regional stack
and one that publishes a core's folder in the run folder.

Tasks are thin: each calls one runner of :mod:`pipelines.flows.stages`. Caching is done by
the runners' content-addressed work store (keys = content hashes of inputs, settings and the
science code), not by Prefect's result store, because the results are files on disk and a
cache hit must also check that those files still exist; Prefect's own cache is therefore off
(``NO_CACHE``) and no result is persisted by Prefect.

A failed stage raises :class:`StageFailed` carrying a plain message (picklable, so it crosses
Dask workers intact); a skipped stage returns ``{"skipped": reason}``.
"""

from __future__ import annotations

import pathlib
import time
from typing import Any, Callable

from prefect import task
from prefect.cache_policies import NO_CACHE

from pipelines.flows import stages
from pipelines.flows.plan import RunPlan
from pipelines.flows.store import WorkStore
from pipelines.runfolder import atomic_write_bytes, link_or_copy, publish_folder, staging_folder

__all__ = ["StageFailed", "ingest_task", "training_task", "chronology_task", "calibration_task",
           "reconstruction_task", "events_task", "core_chain_task", "CHAIN_STAGES", "samples_task", "stack_task",
           "outputs_task"]

#: the stages a chained task runs, in order
CHAIN_STAGES = ("chronology", "calibration", "reconstruction", "events")

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
    except Exception as error:  # noqa: BLE001 - any failure is isolated to its core
        raise StageFailed(stages.problem_text(error)) from None


@task(name="ingest", task_run_name="ingest[{label}]", **_OPTIONS)
def ingest_task(plan: RunPlan, label: str, folder: str, store: WorkStore, recompute: bool = False) -> dict:
    """Read and validate one core folder."""
    return _guarded(stages.run_ingest, plan, folder, store, recompute)


@task(name="training", task_run_name="training[{label}]", **_OPTIONS)
def training_task(plan: RunPlan, label: str, store: WorkStore, recompute: bool = False) -> dict:
    """Fit one training set's transfer function (once per run, shared by the cores)."""
    return _guarded(stages.run_training, plan, label, store, recompute)


@task(name="chronology", task_run_name="chronology[{label}]", **_OPTIONS)
def chronology_task(plan: RunPlan, label: str, ingest: dict, store: WorkStore, recompute: bool = False) -> dict:
    """Calibrate the dates and build the age-depth ensemble."""
    return _guarded(stages.run_chronology, plan, ingest, store, recompute)


@task(name="calibration", task_run_name="calibration[{label}]", **_OPTIONS)
def calibration_task(plan: RunPlan, label: str, ingest: dict, chronology: dict, training: dict,
                     store: WorkStore, recompute: bool = False) -> dict:
    """Calibrate the proxies of one core along its age ensemble."""
    return _guarded(stages.run_calibration, plan, ingest, chronology, training, store, recompute)


@task(name="reconstruction", task_run_name="reconstruction[{label}]", **_OPTIONS)
def reconstruction_task(plan: RunPlan, label: str, ingest: dict, chronology: dict, calibration: dict,
                        store: WorkStore, recompute: bool = False) -> dict:
    """Put the calibrated ensembles on the time grid."""
    return _guarded(stages.run_reconstruction, plan, ingest, chronology, calibration, store, recompute)


@task(name="events", task_run_name="events[{label}]", **_OPTIONS)
def events_task(plan: RunPlan, label: str, reconstruction: dict, store: WorkStore,
                recompute: bool = False) -> dict:
    """Detect abrupt events in the reconstruction."""
    return _guarded(stages.run_events, plan, reconstruction, store, recompute)


def run_core_chain(plan: RunPlan, ingest: dict, training: dict, store: WorkStore,
                   recompute: bool = False) -> list[tuple[str, dict]]:
    """Run chronology -> calibration -> reconstruction -> events of one core in one go.

    Each stage still goes through its own runner, so it is cached under its own content key
    exactly as when submitted alone (and gives the same bytes). The chain stops at the
    first skipped or failed stage.

    Returns
    -------
    list of (stage, result)
        One entry per stage run; a failed stage's result is ``{"failed": message}``.
    """
    entries: dict[str, dict] = {"ingest": ingest}
    calls = {
        "chronology": lambda: stages.run_chronology(plan, ingest, store, recompute),
        "calibration": lambda: stages.run_calibration(plan, ingest, entries["chronology"], training,
                                                      store, recompute),
        "reconstruction": lambda: stages.run_reconstruction(plan, ingest, entries["chronology"],
                                                            entries["calibration"], store, recompute),
        "events": lambda: stages.run_events(plan, entries["reconstruction"], store, recompute),
    }
    done: list[tuple[str, dict]] = []
    for stage in CHAIN_STAGES:
        try:
            result = _guarded(calls[stage])
        except StageFailed as failed:
            done.append((stage, {"failed": str(failed)}))
            break
        done.append((stage, result))
        if "skipped" in result:
            break
        entries[stage] = result
    return done


@task(name="core-chain", task_run_name="core-chain[{label}]", **_OPTIONS)
def core_chain_task(plan: RunPlan, label: str, ingests: list[dict], training: dict, store: WorkStore,
                    recompute: bool = False) -> list[list[tuple[str, dict]]]:
    """All science stages of a few cores as one task (used on Dask, where each task run's
    orchestration costs CPU that the workers need); one chain per core, failures isolated."""
    return [run_core_chain(plan, ingest, training, store, recompute) for ingest in ingests]


@task(name="samples", task_run_name="samples[{label}]", **_OPTIONS)
def samples_task(plan: RunPlan, label: str, ingest: dict, chronology: dict, calibration: dict | None,
                 store: WorkStore, recompute: bool = False) -> dict:
    """The per-sample table of one dated core (ages, raw and calibrated values, flags)."""
    from pipelines.flows.dated_samples import run_dated_samples

    return _guarded(run_dated_samples, plan, ingest, chronology, calibration, store, recompute)


@task(name="stack", task_run_name="stack[{label}]", **_OPTIONS)
def stack_task(plan: RunPlan, label: str, reconstructions: dict, store: WorkStore,
               recompute: bool = False) -> dict:
    """Regional composite of all reconstructions."""
    return _guarded(stages.run_stack, plan, reconstructions, store, recompute)


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
                if name.endswith(".parquet"):
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
