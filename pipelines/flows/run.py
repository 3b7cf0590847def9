"""One whole run: config -> plan -> archive flow -> run folder -> report -> manifest.

This is what ``downcore run``, ``downcore demo`` and ``downcore replay`` call. The run folder
is created first (refused when it exists and is not empty), marked in progress, filled file by
file (each write atomic, each core folder renamed into place when complete) and finished with
``manifest.json``; the in-progress marker is removed last. A run folder with a manifest is
complete; one without is not a result.
"""

from __future__ import annotations

import dataclasses
import os
import pathlib
import time
from dataclasses import dataclass, field
from typing import Any

import pandas as pd

from pipelines.flows.plan import RunPlan, build_plan
from pipelines.flows.runners import ExecutorChoice, prefect_run_settings, task_runner_for
from pipelines.flows.stage_table import CORE_STAGES, SCIENCE_STAGES
from pipelines.clock import utc_now
from pipelines.manifest import build_manifest, write_manifest
from pipelines.outputs_schema import TABLES, checked
from pipelines.runfolder import (IN_PROGRESS_MARKER, atomic_copy, atomic_write_json, atomic_write_parquet,
                                 atomic_write_text, create_run_folder, ensure_writable_folder,
                                 release_run_folder)
from pipelines.runlock import run_identity
from pipelines.runpaths import check_run_locations

__all__ = ["RunOutcome", "execute_run", "default_cache_dir", "resolved_config"]

CACHE_ENV = "DOWNCORE_CACHE_DIR"


@dataclass
class RunOutcome:
    """What a finished run produced."""

    run_dir: pathlib.Path
    summary: pd.DataFrame
    timings: pd.DataFrame
    notes: list[str] = field(default_factory=list)
    seconds: float = 0.0

    @property
    def failed(self) -> list[str]:
        return list(self.summary.loc[self.summary["status"] == "failed", "core_id"])


def default_cache_dir(out_dir: str | os.PathLike[str]) -> pathlib.Path:
    """``$DOWNCORE_CACHE_DIR`` if set, else ``.downcore-cache`` next to the run folder (so runs
    into the same output root share finished work)."""
    if os.environ.get(CACHE_ENV):
        return pathlib.Path(os.environ[CACHE_ENV]).expanduser().resolve()
    return pathlib.Path(out_dir).expanduser().resolve().parent / ".downcore-cache"


def _plain(value: Any) -> Any:
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return {f.name: _plain(getattr(value, f.name)) for f in dataclasses.fields(value)}
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, (pathlib.PurePath,)):
        return str(value)
    if hasattr(value, "item") and not isinstance(value, (str, bytes)):
        try:
            return value.item()
        except (TypeError, ValueError):
            return str(value)
    return value if value is None or isinstance(value, (str, int, float, bool)) else str(value)


def resolved_config(plan: RunPlan) -> dict[str, Any]:
    """The config as the run used it: every stage's settings with defaults filled in."""
    return {
        "run": {"seed": plan.run_seed, "ensemble": plan.ensemble, "cores": list(plan.core_folders)},
        "curves": {name: path for name, path, _ in plan.curves},
        "settings": {stage: _plain(s) for stage, s in sorted(plan.settings.items())},
        "training": _plain(plan.config.sections["training"]),
        "instrumental": _plain(plan.config.sections["instrumental"]),
        "report": _plain(plan.config.sections["report"]),
        "series": _plain(plan.config.sections.get("series", {})),
    }


def _write_run_tables(run_dir: pathlib.Path, result: dict) -> None:
    """summary.parquet, timings.csv, the training sets' tables and the stack, where the
    run-folder schema puts them."""
    summary = checked("summary", pd.DataFrame(result["cores"], columns=list(TABLES["summary"].names)))
    atomic_write_parquet(run_dir / TABLES["summary"].path, summary)
    timings = checked("timings", pd.DataFrame(result["timings"], columns=list(TABLES["timings"].names)))
    atomic_write_text(run_dir / TABLES["timings"].path, timings.to_csv(index=False))
    for name, entry in sorted(result["training"].items()):
        for part in ("cv", "skill"):
            target = TABLES[f"training_{part}"].path.replace("<name>", name)
            atomic_copy(entry["paths"][part], run_dir / target)
    for key in ("stack", "stack_ensemble", "regional_events", "regional_onsets"):
        name = TABLES[key].path
        if result.get("stack") and name in result["stack"].get("paths", {}):
            atomic_copy(result["stack"]["paths"][name], run_dir / name)
    for key in ("archive_events", "lead_lag"):
        name = TABLES[key].path
        if result.get("archive_events") and name in result["archive_events"].get("paths", {}):
            atomic_copy(result["archive_events"]["paths"][name], run_dir / name)


def _report_helper(report: bool) -> Any:
    """A helper process for the report, started before the flow so that its imports overlap
    the science (see :mod:`pipelines.report.drawing`); ``None`` without a report."""
    if not report:
        return None
    from pipelines.report.drawing import ReportHelper

    return ReportHelper.start_if_useful()


def _write_report(run_dir: pathlib.Path, notes: list[str], helper: Any = None) -> None:
    """The report and the exports (a failure of either is a note: the science outputs stay valid)."""
    from pipelines.report import write_report_and_exports

    notes.extend(write_report_and_exports(run_dir, helper=helper))


def _streams(result: dict) -> list[str]:
    """The random streams used (``stage/core_id``): every science stage a core reached."""
    streams = []
    series = set(result.get("series", ()))
    for row in result["cores"]:
        if row["core_id"] in series:
            reached = ("series", "events") if row["stage_reached"] == "events" else ("series",)
            streams += [f"{stage}/{row['core_id']}" for stage in reached]
        elif row["stage_reached"] in CORE_STAGES:
            last = CORE_STAGES.index(row["stage_reached"])
            streams += [f"{stage}/{row['core_id']}" for stage in SCIENCE_STAGES if CORE_STAGES.index(stage) <= last]
    if result.get("stack"):
        streams.append("stack/all-cores")
        streams += [f"stack-events/{variable}" for variable in result["stack"].get("variables", [])]
    return streams


def execute_run(config_path: str | os.PathLike[str], out_dir: str | os.PathLike[str], *,
                choice: ExecutorChoice | None = None, cache_dir: str | os.PathLike[str] | None = None,
                recompute: bool = False, resume: bool = False, progress: Any = None,
                report: bool = True, plan: RunPlan | None = None,
                local_server: Any = None) -> RunOutcome:
    """Run a config into a new run folder; see the module docstring.

    Parameters
    ----------
    config_path : path
        The run config (TOML).
    out_dir : path
        The run folder to create (refused when it exists and is not empty, unless ``resume``
        and it holds an unfinished run).
    choice : ExecutorChoice
        Threads (default, 2 workers) or Dask.
    cache_dir : path
        The work store (default :func:`default_cache_dir`).
    recompute : bool
        Ignore finished work in the cache (it is overwritten by the new results).
    progress : RunProgress or None
        Progress observer (see :mod:`pipelines.progress`).
    report : bool
        Write the HTML report and exports at the end.
    local_server : pipelines.flows.localserver.LocalServer or None
        A temporary Prefect server started earlier by the caller (used, not stopped, here).

    Raises
    ------
    proxies.problems.InputError
        For problems in the run config (before anything is written).
    pipelines.runfolder.RunFolderError
        When the run folder cannot be created or written.
    """
    choice = choice or ExecutorChoice()
    started_utc = utc_now()
    started = time.perf_counter()
    plan = plan or build_plan(config_path)
    cache = pathlib.Path(cache_dir).expanduser().resolve() if cache_dir else default_cache_dir(out_dir)
    check_run_locations(plan, out_dir, cache)
    ensure_writable_folder(cache, "the work store (--cache-dir)")
    inputs = list(plan.inputs)
    run_dir = create_run_folder(out_dir, resume=resume, identity=run_identity(plan.config_path, plan.config_text))
    try:
        return _run_into(run_dir, plan, inputs, cache, choice=choice, recompute=recompute, resume=resume,
                         progress=progress, report=report, local_server=local_server,
                         started=(started, started_utc))
    finally:
        release_run_folder(run_dir, finished=(run_dir / "manifest.json").is_file())


class _DrawWhenPublished:
    """A progress observer that also has the report helper draw each core's figures as soon
    as the core's folder is published (the other cores' science still running)."""

    def __init__(self, inner: Any, helper: Any, run_dir: pathlib.Path):
        self.inner, self.helper, self.run_dir = inner, helper, run_dir

    def started(self, total: int) -> None:
        if self.inner is not None:
            self.inner.started(total)

    def stage(self, label: str, stage: str) -> None:
        if self.inner is not None:
            self.inner.stage(label, stage)

    def finished(self, track: Any) -> None:
        if self.inner is not None:
            self.inner.finished(track)
        if (self.run_dir / track.name).is_dir():
            self.helper.draw_core(self.run_dir, track.name)  # never raises: a dead helper is skipped


def _orchestrated(run_dir: pathlib.Path, plan: RunPlan, cache: pathlib.Path, choice: ExecutorChoice,
                  recompute: bool, progress: Any, local_server: Any, helper: Any = None) -> dict:
    """The archive flow's result: every stage of the run through Prefect."""
    from pipelines.flows.archive import (archive_flow, register_observer, register_plan, unregister_observer,
                                         unregister_plan)

    from pipelines.flows.science_pool import science_pool_for_run

    runner = task_runner_for(choice, cache / "dask-scratch")
    observer = _DrawWhenPublished(progress, helper, run_dir) if helper is not None else progress
    observer_id = register_observer(observer) if observer is not None else None
    plan_id = register_plan(plan)
    try:
        # the science workers start first: their imports and the first cores' head start
        # overlap the Prefect server's start-up
        with science_pool_for_run(plan, str(cache), choice.workers, recompute=recompute,
                                  use=not (choice.dask_address or choice.dask_local)):
            if local_server is not None and progress is not None:
                progress.phase("starting the Prefect server")
            api_url = local_server.wait_ready() if local_server is not None else None
            with prefect_run_settings(choice, api_url=api_url):
                return archive_flow.with_options(task_runner=runner)(
                    plan_id=plan_id, run_dir=str(run_dir), cache_dir=str(cache), recompute=recompute,
                    observer_id=observer_id, inline_stages=choice.inline_stages(),
                    batch_chains=choice.batch_core_chains())
    finally:
        unregister_plan(plan_id)
        if observer_id:
            unregister_observer(observer_id)


def _run_into(run_dir: pathlib.Path, plan: RunPlan, inputs: list, cache: pathlib.Path, *, choice: ExecutorChoice,
              recompute: bool, resume: bool, progress: Any, report: bool, local_server: Any,
              started: tuple[float, str]) -> RunOutcome:
    """The run itself, in a run folder whose lock this process holds."""
    helper = _report_helper(report)
    try:
        return _report_and_manifest(run_dir, plan, inputs, cache, choice=choice, recompute=recompute, resume=resume,
                                    progress=progress, report=report, local_server=local_server,
                                    started=started, helper=helper)
    finally:
        if helper is not None:
            helper.close()


def _report_and_manifest(run_dir: pathlib.Path, plan: RunPlan, inputs: list, cache: pathlib.Path, *,
                         choice: ExecutorChoice, recompute: bool, resume: bool, progress: Any, report: bool,
                         local_server: Any, started: tuple[float, str], helper: Any) -> RunOutcome:
    """The run's work (from the store, or through the flow), its tables, report and manifest."""
    from pipelines.flows.assemble import assemble_from_store

    started, started_utc = started
    try:
        result = None if recompute else assemble_from_store(plan, str(run_dir), str(cache), progress)
        if result is not None and local_server is not None:
            local_server.stop()  # spawned in the background, never waited for: nothing to orchestrate
        if result is None:
            result = _orchestrated(run_dir, plan, cache, choice, recompute, progress, local_server, helper)
    except BaseException:
        if progress is not None:
            progress.close()
        raise
    if progress is not None and not report:
        progress.close()
    notes = list(result["notes"])
    _write_run_tables(run_dir, result)
    results_utc = utc_now()

    def manifest_now() -> dict:
        manifest = build_manifest(config_path=plan.config_path, config_text=plan.config_text,
                                  resolved_config=resolved_config(plan), inputs=inputs,
                                  run_seed=plan.run_seed, streams=_streams(result),
                                  executor=choice.describe(), cores=result["cores"], run_dir=run_dir,
                                  started_utc=started_utc, seconds=time.perf_counter() - started,
                                  known_hashes=result.get("known_hashes"), created_utc=results_utc)
        manifest["notes"] = notes
        manifest["cache_dir"] = str(cache)
        manifest["code_fingerprint"] = plan.fingerprint
        manifest["options"] = {"report": bool(report), "recompute": bool(recompute), "resume": bool(resume)}
        return manifest

    if report:
        # the report shows the run's facts: give it a provisional manifest in the marker
        atomic_write_json(run_dir / IN_PROGRESS_MARKER, manifest_now())
        try:
            if progress is not None:
                progress.phase("writing the report and exports")
            _write_report(run_dir, notes, helper)
        finally:
            if progress is not None:
                progress.close()
    manifest = manifest_now()
    seconds = manifest["seconds"]
    write_manifest(run_dir, manifest)
    return RunOutcome(run_dir=run_dir, summary=pd.DataFrame(result["cores"]),
                      timings=pd.DataFrame(result["timings"]), notes=notes, seconds=seconds)
