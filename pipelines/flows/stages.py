"""Stage runners: the plain-Python bodies of the Prefect tasks.

Each runner is given its cache key (built from the stage table, :mod:`pipelines.flows.stage_table`), returns the finished work-store
entry when there is one, and otherwise loads its inputs from the store, calls one stage
function of :mod:`proxies` with ``rng_for(run_seed, stage, core_id)``, writes the stage's
run-folder tables (deterministic Parquet) and a pickled result for the next stage into a new
store entry, and returns the entry's small description (paths, warnings, notes, timings).
Nothing large travels between tasks: only paths and hashes.
"""

from __future__ import annotations

import contextlib
import contextvars
import pathlib
import threading
import time
from typing import Any, Callable

import numpy as np
import pandas as pd

from pipelines.flows.plan import RunPlan
from pipelines.flows.shared import shared_instrumental, shared_result
from pipelines.flows.store import WorkStore, load_object, save_object
from pipelines.outputs_schema import checked, member_column_names, table as output_table
from pipelines.runfolder import atomic_write_parquet
from proxies.problems import InputError
from proxies.seeding import rng_for
from proxies.warning_sinks import collected_warnings

__all__ = ["StageSkipped", "NotCached", "probe", "run_ingest", "run_training", "run_chronology", "run_calibration",
           "run_reconstruction", "run_events", "run_archive_events", "run_stack", "pin_blas_threads", "write_tables"]


class StageSkipped(Exception):
    """A stage cannot run for this core and is skipped (with the reason as a note)."""


class NotCached(Exception):
    """Raised in probe mode when a stage has no finished entry in the work store."""


#: when set (in the flow's driver thread), runners only look their entry up, never compute
PROBING: contextvars.ContextVar[bool] = contextvars.ContextVar("downcore_probing", default=False)


def probe(run: Callable[[], dict]) -> dict | None:
    """The finished entry ``run()`` would return, without computing anything.

    Returns ``None`` when the stage must run (no entry, or the lookup itself failed -- the
    task will then report the failure), or ``{"skipped": reason}`` for a skipped stage.
    """
    token = PROBING.set(True)
    try:
        return run()
    except NotCached:
        return None
    except StageSkipped as skipped:
        return {"skipped": str(skipped), "seconds": 0.0, "cached": True}
    except Exception:  # noqa: BLE001 - the task reports real failures with their message
        return None
    finally:
        PROBING.reset(token)


# --- process set-up ------------------------------------------------------------------------

_SETUP_LOCK = threading.Lock()
_SETUP_DONE = False


def pin_blas_threads() -> None:
    """Once per process: one BLAS/OpenMP thread (same reductions on every executor, see
    ../shared/PREFECT.md)."""
    global _SETUP_DONE
    with _SETUP_LOCK:
        if _SETUP_DONE:
            return
        from threadpoolctl import threadpool_limits

        threadpool_limits(limits=1)
        _SETUP_DONE = True


@contextlib.contextmanager
def _collect_warnings():
    """Collect the warnings raised by science code in this thread (thread-safe,
    :func:`proxies.warning_sinks.collected_warnings`)."""
    pin_blas_threads()
    with collected_warnings() as sink:
        yield sink


# --- helpers -------------------------------------------------------------------------------

def write_tables(staged: pathlib.Path, tables: dict[str, pd.DataFrame]) -> dict[str, str]:
    """Write run-folder tables (schema key -> frame) as deterministic Parquet into a staging
    folder (synced once when published), each checked against
    :mod:`pipelines.outputs_schema` first; returns ``{file name: file name}`` for the entry."""
    files = {}
    for key, frame in tables.items():
        name = output_table(key).file_name
        atomic_write_parquet(staged / name, checked(key, _table(frame)), sync_folder=False)
        files[name] = name
    return files


def _table(frame: pd.DataFrame) -> pd.DataFrame:
    if not isinstance(frame.index, pd.RangeIndex) or frame.index.name is not None:
        frame = frame.reset_index()
    return frame


def _unique(messages: list[str]) -> list[str]:
    return list(dict.fromkeys(str(m) for m in messages))


def _cached_or_build(store: WorkStore, stage: str, key: str, produce: Callable[[pathlib.Path], dict],
                     extra: dict, recompute: bool) -> dict:
    start = time.perf_counter()
    entry = None if recompute else store.lookup(stage, key)
    cached = entry is not None
    if entry is None and PROBING.get():
        raise NotCached(f"{stage} {key}")
    if entry is None:
        entry = store.build(stage, key, produce, replace=recompute)
    entry.update(extra)
    entry["cached"] = cached
    entry["seconds"] = round(time.perf_counter() - start, 4)
    return entry


# --- ingest --------------------------------------------------------------------------------

def run_ingest(plan: RunPlan, store: WorkStore, key: str, recompute: bool, *, folder: str) -> dict:
    """Read and validate one core folder (:func:`pipelines.ingest.load_core`)."""

    def produce(staged: pathlib.Path) -> dict:
        from pipelines.ingest import load_core

        with _collect_warnings() as caught:
            core = load_core(folder)
        return {"files": {"result": save_object(staged, core)}, "core_id": core.id,
                "warnings": _unique(caught)}

    entry = _cached_or_build(store, "ingest", key, produce, {"folder": folder}, recompute)
    return entry


# --- training sets (fitted once per run, shared) --------------------------------------------

def run_training(plan: RunPlan, store: WorkStore, key: str, recompute: bool, *, name: str) -> dict:
    """Fit the transfer function of training set ``name`` once for the whole run."""

    def produce(staged: pathlib.Path) -> dict:
        from pipelines.auxiliary import read_training_set
        from proxies.calibration import fit_transfer_function

        with _collect_warnings() as caught:
            training, training_spec = read_training_set(plan.config, name)
            fitted = fit_transfer_function(training, training_spec, rng_for(plan.run_seed, "calibration", f"training:{name}"))
        atomic_write_parquet(staged / "cv.parquet", checked("training_cv", _table(fitted.cv)), sync_folder=False)
        atomic_write_parquet(staged / "skill.parquet", checked("training_skill", _table(fitted.skill)),
                             sync_folder=False)
        return {"files": {"result": save_object(staged, fitted), "cv": "cv.parquet",
                          "skill": "skill.parquet"},
                "warnings": _unique(caught)}

    return _cached_or_build(store, "training", key, produce, {"name": name}, recompute)


# --- chronology ------------------------------------------------------------------------------

def _load_curves(plan: RunPlan) -> dict[str, Any]:
    """The run's curves, each file parsed once per process (shared with the run's check)."""
    from pipelines.curvefiles import read_curve_file_once

    return {name: read_curve_file_once(path, name=name) for name, path, _ in plan.curves}


def run_chronology(plan: RunPlan, store: WorkStore, key: str, recompute: bool, *, ingest: dict) -> dict:
    """Calibrate the dates and build the age-depth ensemble of one core."""
    core_id = ingest["core_id"]

    def produce(staged: pathlib.Path) -> dict:
        from proxies.chronology import build_chronology

        core = shared_result(ingest)
        with _collect_warnings() as caught:
            result = build_chronology(core, _load_curves(plan), plan.settings["chronology"],
                                      plan.ensemble, rng_for(plan.run_seed, "chronology", core_id))
        ensemble = np.asarray(result.ensemble, dtype=float)
        members = pd.DataFrame(ensemble, columns=member_column_names(ensemble.shape[1]))
        members.insert(0, "depth_cm", np.asarray(result.depth_cm, dtype=float))
        files = write_tables(staged, {"chronology": result.summary, "age_ensemble": members,
                                      "dates": result.dates, "date_ranges": result.date_ranges,
                                      "date_densities": result.date_densities,
                                      "hyperparameters": result.hyperparameters})
        return {"files": {"result": save_object(staged, result), **files},
                "warnings": _unique(caught + list(result.warnings))}

    return _cached_or_build(store, "chronology", key, produce, {"core_id": core_id}, recompute)


# --- calibration -----------------------------------------------------------------------------

def _instrumental(plan: RunPlan) -> dict[str, Any]:
    """The run's instrumental series, each read once per process (shared: never modified)."""
    return {name: shared_instrumental(plan, name) for name in sorted(plan.auxiliary.get("instrumental", {}))}


def run_calibration(plan: RunPlan, store: WorkStore, key: str, recompute: bool, *, ingest: dict,
                    chronology: dict, training: dict[str, dict]) -> dict:
    """Calibrate every proxy of one core (published equations, instrumental overlap,
    transfer functions), member by member along the age ensemble.

    Raises
    ------
    StageSkipped
        When the config has no ``[calibration]`` section and the defaults cannot calibrate
        this core (the reason becomes a note in the summary).
    """
    core_id = ingest["core_id"]

    def produce(staged: pathlib.Path) -> dict:
        from proxies.calibration import calibrate_core

        core, chron = shared_result(ingest), load_object(chronology)
        transfers = {name: shared_result(entry) for name, entry in sorted(training.items())}
        with _collect_warnings() as caught:
            try:
                result = calibrate_core(core, chron, plan.settings["calibration"], transfers,
                                        _instrumental(plan), plan.ensemble,
                                        rng_for(plan.run_seed, "calibration", core_id))
            except InputError as error:
                if plan.has_section("calibration"):
                    raise
                raise StageSkipped(f"calibration skipped (no [calibration] section and the "
                                   f"defaults do not apply): {error}") from error
        files = write_tables(staged, {"calibration": result.skill, "calibrated_samples": result.samples,
                                      "calibration_diagnostics": result.diagnostics})
        notes = [] if result.records else ["no proxy could be calibrated with these settings"]
        return {"files": {"result": save_object(staged, result), **files}, "n_records": len(result.records),
                "notes": notes, "warnings": _unique(caught + list(result.warnings))}

    return _cached_or_build(store, "calibration", key, produce, {"core_id": core_id}, recompute)


# --- reconstruction ---------------------------------------------------------------------------

def run_reconstruction(plan: RunPlan, store: WorkStore, key: str, recompute: bool, *, ingest: dict,
                       chronology: dict, calibration: dict) -> dict:
    """Put the calibrated ensembles of one core on the time grid (values and anomalies)."""
    core_id = ingest["core_id"]
    if not calibration.get("n_records"):
        raise StageSkipped("reconstruction skipped: no calibrated record")

    def produce(staged: pathlib.Path) -> dict:
        from proxies.reconstruction import reconstruct_core

        core, chron, cal = shared_result(ingest), load_object(chronology), load_object(calibration)
        with _collect_warnings() as caught:
            result = reconstruct_core(core, chron, cal, plan.settings["reconstruction"],
                                      rng_for(plan.run_seed, "reconstruction", core_id))
        return reconstruction_entry(staged, result, caught)

    return _cached_or_build(store, "reconstruction", key, produce, {"core_id": core_id}, recompute)


def reconstruction_entry(staged: pathlib.Path, result: Any, caught: list[str]) -> dict:
    """Write a reconstruction result's tables and pickle; the work-store entry description
    (shared by a core's reconstruction and a dated series, :mod:`pipelines.flows.series`)."""
    files = write_tables(staged, {"reconstruction": result.table, "reconstruction_ensemble": result.ensemble})
    return {"files": {"result": save_object(staged, result), **files}, "n_series": len(result.series),
            "filled": dict(result.filled), "thin": list(result.thin), "notes": list(result.notes),
            "warnings": _unique(caught + list(result.warnings))}


# --- events ------------------------------------------------------------------------------------

def run_events(plan: RunPlan, store: WorkStore, key: str, recompute: bool, *, reconstruction: dict) -> dict:
    """Detect abrupt events (with red-noise significance) in one core's reconstruction."""
    core_id = reconstruction["core_id"]
    if not reconstruction.get("n_series"):
        raise StageSkipped("events skipped: no reconstructed series")

    def produce(staged: pathlib.Path) -> dict:
        from proxies.events import detect_core_events

        rec = load_object(reconstruction)
        with _collect_warnings() as caught:
            result = detect_core_events(rec, plan.settings["events"], rng_for(plan.run_seed, "events", core_id))
        files = write_tables(staged, {"events": result.events, "event_probability": result.probability,
                                      "event_onsets": result.onsets})
        return {"files": {"result": save_object(staged, result), **files},
                "warnings": _unique(caught + list(result.warnings))}

    return _cached_or_build(store, "events", key, produce, {"core_id": core_id}, recompute)


# --- run-level events: archive-wide FDR and lead/lag ------------------------------------------

def run_archive_events(plan: RunPlan, store: WorkStore, key: str, recompute: bool, *,
                       all_events: dict[str, dict]) -> dict:
    """All cores' events with Benjamini-Hochberg q-values (``archive_events.parquet``) and
    the lead/lag of events found in several cores (``lead_lag.parquet``)."""
    usable = {cid: e for cid, e in sorted(all_events.items()) if e.get("paths")}
    if not usable:
        raise StageSkipped("archive events skipped: no core has events")

    def produce(staged: pathlib.Path) -> dict:
        from proxies.events.archive_events import run_event_tables

        results = {cid: load_object(e) for cid, e in usable.items()}
        archive, lead_lag = run_event_tables(results, plan.settings["events"])
        return {"files": write_tables(staged, {"archive_events": archive, "lead_lag": lead_lag})}

    return _cached_or_build(store, "archive_events", key, produce, {"core_id": None}, recompute)


# --- regional stack ---------------------------------------------------------------------------

STACK_STREAM = "all-cores"


def run_stack(plan: RunPlan, store: WorkStore, key: str, recompute: bool, *,
              reconstructions: dict[str, dict]) -> dict:
    """Regional composite of the reconstructions of all cores (``stack.parquet``), every
    member kept (``stack_ensemble.parquet``), and the events found in it with their regional
    onset distributions (``regional_events.parquet``, ``regional_onsets.parquet``)."""
    usable = {cid: e for cid, e in sorted(reconstructions.items()) if e.get("n_series")}
    if not usable:
        raise StageSkipped("stack skipped: no core has a reconstruction")

    def produce(staged: pathlib.Path) -> dict:
        from proxies.events.regional import regional_events
        from proxies.reconstruction.stack import stack_ensembles, stack_records

        results = {cid: load_object(e) for cid, e in usable.items()}
        with _collect_warnings() as caught:
            ensembles = stack_ensembles(results, plan.settings["reconstruction"], seed=plan.run_seed)
            del results
            table = stack_records({}, plan.settings["reconstruction"], ensembles=ensembles)
            events, onsets = regional_events(ensembles, plan.settings["events"],
                                             lambda variable: rng_for(plan.run_seed, "stack-events", variable))
        files = write_tables(staged, {"stack": table, "stack_ensemble": _stack_members(ensembles),
                                      "regional_events": events, "regional_onsets": onsets})
        return {"files": files, "warnings": _unique(caught), "variables": sorted(ensembles)}

    return _cached_or_build(store, "stack", key, produce, {"core_id": None}, recompute)


def _stack_members(ensembles: dict) -> pd.DataFrame:
    frames = [pd.concat([pd.DataFrame({"age_cal_bp": s.age_cal_bp, "variable": variable}),
                         pd.DataFrame(s.values, columns=member_column_names(s.values.shape[1]))], axis=1)
              for variable, s in ensembles.items()]
    return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame(
        {"age_cal_bp": pd.Series(dtype=float), "variable": pd.Series(dtype=object)})


def problem_text(error: BaseException) -> str:
    """One readable paragraph for a failed stage."""
    if isinstance(error, (InputError, OSError)) and str(error):
        return str(error)
    return f"{type(error).__name__}: {error}"
