"""The archive flow: every core of a run through every stage, concurrently, failures isolated.

The flow drives each core through ingest -> chronology -> calibration -> reconstruction ->
events -> outputs by submitting the next task of a core as soon as its previous task finishes
(so workers stay busy across cores, and a failed core simply stops). Training sets are fitted
once, before any calibration, and shared. When all cores are done the regional stack is
built. Dated series (``[series.<name>]``) join as cores whose reconstruction is their
``series`` stage: their events, folder, stack and lead/lag follow as for a core. The flow
returns one summary row per core (and series); it never fails because a core failed.

Concurrency is the task runner's: ``ThreadPoolTaskRunner(max_workers=N)`` by default or a
``DaskTaskRunner`` (see :mod:`pipelines.flows.runners`). Results do not depend on it: every
random stream is ``rng_for(run_seed, stage, core_id)``, and tables are written in a fixed order.
"""

from __future__ import annotations

import collections
import datetime as _dt
import pathlib
import queue
from dataclasses import dataclass, field
from typing import Any, Callable

from prefect import flow

from pipelines.flows import stages, tasks
from pipelines.flows.plan import RunPlan
from pipelines.flows.stage_table import (CORE_STAGES, PUBLISH_STAGES, SCIENCE_STAGES, STAGES, call_stage,
                                         probe_stage)
from pipelines.flows.status import RECONSTRUCTED, finished_status
from pipelines.flows.store import WorkStore

__all__ = ["archive_flow", "core_flow", "collect_run", "CoreTrack", "register_observer",
           "unregister_observer"]

#: on Dask, up to this many cores' science stages go to a worker as one task: each task
#: run costs orchestration CPU in the flow process and the Prefect server (~0.1-0.2 s,
#: measured) that on a small machine competes with the workers
CHAIN_BATCH_CORES = 4

_OBSERVERS: dict[str, Any] = {}
_PLANS: dict[str, RunPlan] = {}


def register_observer(observer: Any) -> str:
    """Make a progress observer reachable by id from inside the flow (objects with methods
    ``started(total)``, ``stage(label, stage)``, ``finished(track)``); returns its id."""
    key = f"observer-{id(observer)}"
    _OBSERVERS[key] = observer
    return key


def unregister_observer(key: str) -> None:
    _OBSERVERS.pop(key, None)


def register_plan(plan: RunPlan) -> str:
    """Make a plan reachable by id from inside the flow; returns its id.

    Flow parameters are sent to the Prefect server, which refuses large ones (~512 KB, see
    ../shared/PREFECT.md): a 1,000-core plan (every input file with its hash) is larger than
    that, so the archive flow takes the plan's id, not the plan."""
    key = f"plan-{plan.fingerprint[:12]}-{id(plan)}"
    _PLANS[key] = plan
    return key


def unregister_plan(key: str) -> None:
    _PLANS.pop(key, None)


class _Silent:
    def started(self, total: int) -> None: ...
    def stage(self, label: str, stage: str) -> None: ...
    def finished(self, track: "CoreTrack") -> None: ...


@dataclass
class CoreTrack:
    """Where one core is in the run, and what happened to it."""

    folder: str
    label: str
    core_id: str | None = None
    entries: dict[str, dict] = field(default_factory=dict)
    stage: str = "ingest"
    reached: str = ""
    status: str = "running"
    error: str = ""
    warnings: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    seconds: dict[str, float] = field(default_factory=dict)
    cached: dict[str, bool] = field(default_factory=dict)
    log: list[str] = field(default_factory=list)
    publish_stages_asked: bool = False
    publish_stages_left: int = 0

    def say(self, text: str) -> None:
        stamp = _dt.datetime.now(_dt.timezone.utc).strftime("%H:%M:%S")
        self.log.append(f"{stamp}  {text}")

    @property
    def name(self) -> str:
        return self.core_id or self.label

    def row(self) -> dict[str, Any]:
        """The summary row (deterministic columns; timings go to timings.csv)."""
        return {"core_id": self.name, "folder": self.folder, "status": self.status,
                "stage_reached": self.reached or "none", "n_warnings": len(self.warnings),
                "warnings": " | ".join(self.warnings), "notes": " | ".join(self.notes),
                "error": self.error}


class _Finished:
    """A stage found finished in the work store (quacks like a completed future)."""

    def __init__(self, value: dict):
        self.value = value

    def result(self, raise_on_failure: bool = False) -> dict:
        return self.value


class _Driver:
    """Submits each core's next stage (in :data:`CORE_STAGES` order) when its previous one
    finishes; a stage already in the work store is looked up instead of submitted."""

    def __init__(self, plan: RunPlan, run_dir: str, store: WorkStore, recompute: bool, observer: Any,
                 inline_stages: tuple[str, ...] = (), chain: bool = False, with_series: bool = True):
        self.plan, self.run_dir, self.store, self.recompute = plan, run_dir, store, recompute
        self.inline_stages = frozenset(inline_stages)
        self.chain = chain
        self.ready: list[CoreTrack] = []  # cores queued for a chained task
        self.inline: collections.deque = collections.deque()
        self.observer = observer
        self.done: queue.Queue = queue.Queue()
        self.pending = 0
        self.training: dict[str, dict] = {}
        self.training_failed: dict[str, str] = {}
        self.training_left = set(plan.auxiliary.get("training", {}))
        self.waiting_for_training: list[CoreTrack] = []
        self.ids: dict[str, str] = {}
        self.tracks: list[CoreTrack] = []
        self.known_hashes: dict[str, tuple[int, int, str]] = {}
        self.series = dict(plan.auxiliary.get("series", {})) if with_series else {}

    # -- submission ---------------------------------------------------------------------
    def _entries(self, track: CoreTrack) -> dict:
        return {**track.entries, "folder": track.folder, "training": dict(sorted(self.training.items()))}

    def _submit(self, track: CoreTrack | None, stage: str, label: str, entries: dict) -> None:
        """Submit ``stage``'s task, or queue the finished entry found in the work store."""
        self.pending += 1
        if track is not None:
            track.stage = stage
            self.observer.stage(track.label, stage)
        owner = label if track is None else track  # a training set is known by its name
        found = None if self.recompute else probe_stage(stage, self.plan, entries, self.store)
        if found is not None:
            self.done.put((owner, stage, _Finished(found)))
            return
        task, kwargs = tasks.STAGE_TASKS[stage], {"plan": self.plan, "label": label, "entries": entries,
                                                  "store": self.store, "recompute": self.recompute}
        self._send(owner, stage, task, kwargs)

    def _send(self, track: Any, stage: str, task, kwargs: dict) -> None:
        if stage in self.inline_stages:
            self.inline.append((track, stage, task, kwargs))
            return
        future = task.submit(**kwargs)
        future.add_done_callback(lambda f, t=track, s=stage: self.done.put((t, s, f)))

    def start(self) -> None:
        for name in sorted(self.training_left):
            self._submit(None, "training", name, {"name": name})
        for folder in self.plan.core_folders:
            track = CoreTrack(folder=folder, label=pathlib.Path(folder).name)
            self.tracks.append(track)
            track.say(f"core folder {folder}")
            self._submit(track, "ingest", track.label, {"folder": folder})
        for name, (path, _) in sorted(self.series.items()):
            track = CoreTrack(folder=path, label=name)
            self.tracks.append(track)
            track.say(f"dated series {name}: {path}")
            self._submit(track, "series", name, {"name": name})

    def _next(self, track: CoreTrack, finished: str) -> None:
        position = CORE_STAGES.index(finished)
        if position + 1 == len(CORE_STAGES):
            self._publish(track)
            return
        stage = CORE_STAGES[position + 1]
        needs_training = "training" in STAGES[stage].inputs
        chained = self.chain and finished == "ingest"
        if (needs_training or chained) and self.training_left:
            self.waiting_for_training.append(track)
            track.say("waiting for the training sets")
            return
        if chained:
            self._submit_chain(track)
            return
        if needs_training:
            self._note_failed_training(track)
        self._submit(track, stage, track.name, self._entries(track))

    def _note_failed_training(self, track: CoreTrack) -> None:
        if self.training_failed:
            note = "; ".join(f"training set {n} failed: {m}" for n, m in sorted(self.training_failed.items()))
            track.notes.append(f"calibration without the failed training sets ({note})")

    def _submit_chain(self, track: CoreTrack) -> None:
        """Queue all science stages of a core for a chained task; a core whose first science
        stage is already in the work store goes stage by stage instead (each looked up)."""
        first = SCIENCE_STAGES[0]
        if not self.recompute and probe_stage(first, self.plan, self._entries(track), self.store) is not None:
            self._submit(track, first, track.name, self._entries(track))
            return
        self._note_failed_training(track)
        track.stage = first
        self.observer.stage(track.label, first)
        self.ready.append(track)
        if len(self.ready) >= CHAIN_BATCH_CORES:
            self._flush_chains()

    def _flush_chains(self) -> None:
        """Submit the queued cores as one task (see :data:`CHAIN_BATCH_CORES`)."""
        batch, self.ready = self.ready, []
        self.pending += 1
        label = batch[0].name if len(batch) == 1 else f"{batch[0].name}..{batch[-1].name}"
        future = tasks.core_chain_task.submit(plan=self.plan, label=label,
                                              chains=[self._entries(t) for t in batch],
                                              store=self.store, recompute=self.recompute)
        future.add_done_callback(lambda f, b=tuple(batch): self.done.put((b, "chain", f)))

    def _on_chains(self, batch: tuple[CoreTrack, ...], results: Any) -> None:
        """Record each stage of each chained core as if it had run alone; a core's last
        stage decides what happens next (publish the core)."""
        for position, track in enumerate(batch):
            if isinstance(results, BaseException):
                self._on_core(track, SCIENCE_STAGES[0], results)
                continue
            chain = results[position]
            for index, (stage, result) in enumerate(chain):
                outcome = tasks.StageFailed(result["failed"]) if "failed" in result else result
                if index == len(chain) - 1:
                    self._on_core(track, stage, outcome)
                else:
                    self._record(track, stage, outcome)

    def _ask_publish_stages(self, track: CoreTrack) -> bool:
        """Submit the :data:`PUBLISH_STAGES` (the per-sample table) of a core that has their
        first inputs (ingest and chronology: a dated core), once, before its folder is
        published; True when something was submitted (the core is published when all are
        done). Inputs the core lacks (a skipped calibration) are given as ``None``."""
        if track.publish_stages_asked:
            return False
        track.publish_stages_asked = True
        wanted = [s for s in PUBLISH_STAGES if all(n in track.entries for n in STAGES[s].inputs[:2])]
        track.publish_stages_left = len(wanted)
        for stage in wanted:
            given = {n: track.entries.get(n) for n in STAGES[stage].inputs}
            self._submit(track, stage, track.name, {**self._entries(track), **given})
        return bool(wanted)

    def _on_publish_stage(self, track: CoreTrack, stage: str, result: Any) -> None:
        if isinstance(result, BaseException):
            track.status, track.error = "failed", f"{stage}: {result}"
            track.say(f"{stage} FAILED: {result}")
        elif "skipped" in result:
            track.notes.append(result["skipped"])
        else:
            track.entries[stage] = result
            track.seconds[stage] = float(result.get("seconds", 0.0))
            track.cached[stage] = bool(result.get("cached"))
            track.warnings += [f"{stage}: {w}" for w in result.get("warnings", [])]
        track.publish_stages_left -= 1
        if track.publish_stages_left == 0:
            self._publish(track)

    def _publish(self, track: CoreTrack) -> None:
        if self._ask_publish_stages(track):
            return
        if track.status == "running":
            track.status = finished_status(track.entries)
        track.say(f"finished: {track.status}, stage reached {track.reached or 'none'}")
        entries = [track.entries[s] for s in (*SCIENCE_STAGES, *PUBLISH_STAGES) if s in track.entries]
        self.pending += 1
        self._send(track, "outputs", tasks.outputs_task, {"run_dir": self.run_dir, "label": track.name,
                                                          "entries": entries, "log_text": self._log_text(track)})

    def _log_text(self, track: CoreTrack) -> str:
        lines = [f"downcore core log: {track.name}", *track.log]
        lines += [f"warning: {w}" for w in track.warnings] + [f"note: {n}" for n in track.notes]
        if track.error:
            lines.append(f"error: {track.error}")
        return "\n".join(lines) + "\n"

    # -- completion ---------------------------------------------------------------------
    def _on_training(self, name: str, result: Any) -> None:
        self.training_left.discard(name)
        if isinstance(result, BaseException):
            self.training_failed[name] = str(result)
        elif "skipped" in result:
            self.training_failed[name] = result["skipped"]
        else:
            self.training[name] = result
        if not self.training_left:
            waiting, self.waiting_for_training = self.waiting_for_training, []
            for track in waiting:
                self._next(track, track.reached)

    def _on_core(self, track: CoreTrack, stage: str, result: Any) -> None:
        if stage in PUBLISH_STAGES:
            self._on_publish_stage(track, stage, result)
            return
        if stage == "series":
            self._on_series(track, result)
            return
        if stage == "outputs":
            if isinstance(result, BaseException):
                track.status, track.error = "failed", f"writing outputs: {result}"
            else:
                self.known_hashes.update(result.get("known_hashes", {}))
            self.observer.finished(track)
            return
        if self._record(track, stage, result):
            self._next(track, stage)

    def _record(self, track: CoreTrack, stage: str, result: Any) -> bool:
        """Record a finished stage of a core; False when the core stops here (failed,
        skipped or a duplicate id: then it has been published)."""
        if isinstance(result, BaseException):
            track.status, track.error = "failed", f"{stage}: {result}"
            track.say(f"{stage} FAILED: {result}")
            self._publish(track)
            return False
        track.seconds[stage] = float(result.get("seconds", 0.0))
        if "skipped" in result:
            track.notes.append(result["skipped"])
            track.say(result["skipped"])
            self._publish(track)
            return False
        if stage == "ingest" and not self._claim_id(track, result["core_id"]):
            return False
        track.entries[stage] = result
        track.reached = stage
        track.cached[stage] = bool(result.get("cached"))
        track.warnings += [f"{stage}: {w}" for w in result.get("warnings", [])]
        track.notes += [f"{stage}: {n}" for n in result.get("notes", [])]
        track.say(f"{stage} done in {result.get('seconds', 0.0):.2f} s"
                  + (" (reused from the cache)" if result.get("cached") else ""))
        return True

    def _on_series(self, track: CoreTrack, result: Any) -> None:
        """A dated series read and gridded: from here on it is a core whose reconstruction
        is done (its events are detected next, then its folder is published)."""
        if not isinstance(result, BaseException) and "skipped" not in result:
            if not self._claim_id(track, track.label):
                return
            track.seconds["series"] = float(result.get("seconds", 0.0))
        if self._record(track, "reconstruction", result):
            self._next(track, "reconstruction")

    def _claim_id(self, track: CoreTrack, core_id: str) -> bool:
        """Give the core its id; a second core with the same id fails (and is published)."""
        if core_id in self.ids:
            track.status = "failed"
            track.error = (f"ingest: core id {core_id!r} is also used by {self.ids[core_id]} -- "
                           "give every core its own id")
            self._publish(track)
            return False
        self.ids[core_id] = track.folder
        track.core_id = core_id
        return True

    def _run_one_inline(self) -> None:
        track, stage, task, kwargs = self.inline.popleft()
        state = task(**kwargs, return_state=True)
        self.done.put((track, stage, _Finished(state.result(raise_on_failure=False))))

    def run(self) -> list[CoreTrack]:
        self.observer.started(len(self.plan.core_folders))
        self.start()
        while self.pending or self.ready:
            if self.inline and self.done.empty():
                self._run_one_inline()  # only when no finished work waits to be dispatched
                continue
            if self.ready and (self.done.empty() or not self.pending):
                self._flush_chains()  # nothing else to do: send what is queued
                continue
            track, stage, future = self.done.get()
            self.pending -= 1
            result = future.result(raise_on_failure=False)
            if stage == "training":
                self._on_training(track, result)
            elif stage == "chain":
                self._on_chains(track, result)
            else:
                self._on_core(track, stage, result)
        return self.tracks


@flow(name="downcore-archive", validate_parameters=False, persist_result=False, log_prints=False)
def archive_flow(plan_id: str, run_dir: str, cache_dir: str, recompute: bool = False,
                 observer_id: str | None = None, inline_stages: tuple[str, ...] = (),
                 chain: bool = False) -> dict:
    """Run every core of the plan registered as ``plan_id`` (:func:`register_plan`) into
    ``run_dir`` (see the module docstring).

    ``inline_stages`` run as task runs in the flow's own process instead of being submitted
    to the task runner. On Dask, where a submitted task costs ~60-80 ms (measured, see
    ../shared/PREFECT.md), the light stages (ingest ~0.05 s, calibration ~0.1 s, outputs:
    hard links) are run inline so that the workers spend their time on the heavy ones, and
    with ``chain`` the science stages of a core go to a worker as one task (each stage still
    cached on its own).

    Returns
    -------
    dict
        ``cores``: one summary row per core (in core-folder order), ``timings``: one row per
        core and stage (seconds, reused from cache or not), ``training``: entry per training
        set, ``stack``: the stack entry or ``None``, ``notes``: run-level notes.
    """
    plan = _PLANS[plan_id]
    observer = _OBSERVERS.get(observer_id or "", _Silent())
    store = WorkStore(cache_dir)
    driver = _Driver(plan, run_dir, store, recompute, observer, tuple(inline_stages), chain)
    return collect_run(driver, _run_level_stage)


def _run_level_stage(driver: _Driver, stage: str, entries: dict) -> Any:
    """A run-level stage not found in the work store, computed: the stack as a task of the
    flow, the archive events inline (light work on small tables). Returns its result, or the
    exception it failed with."""
    if stage == "stack":
        future = tasks.STAGE_TASKS[stage].submit(plan=driver.plan, label="all-cores", entries=entries,
                                                 store=driver.store, recompute=driver.recompute)
        return future.result(raise_on_failure=False)
    try:
        return call_stage(stage, driver.plan, entries, driver.store, driver.recompute)
    except stages.StageSkipped as skipped:
        return {"skipped": str(skipped)}
    except Exception as error:  # noqa: BLE001 - the per-core outputs stay valid
        return RuntimeError(stages.problem_text(error))


def collect_run(driver: _Driver, compute: Callable[[_Driver, str, dict], Any]) -> dict:
    """Run ``driver`` to the end, then the run-level stages (stack, archive events), and
    return the flow's result (see :func:`archive_flow`). A run-level stage found in the work
    store is taken from it; ``compute(driver, stage, entries)`` gives any other."""
    plan, store, recompute = driver.plan, driver.store, driver.recompute

    notes: list[str] = []

    def run_level(stage: str, entries: dict) -> dict | None:
        """The stage's entry, or ``None`` with a note when it failed or was skipped."""
        found = None if recompute else probe_stage(stage, plan, entries, store)
        result = found if found is not None else compute(driver, stage, entries)
        if isinstance(result, BaseException):
            notes.append(f"{stage.replace('_', ' ')} failed: {result}")
            return None
        if "skipped" in result:
            notes.append(result["skipped"])
            return None
        return result

    tracks = driver.run()
    notes += [f"training set {n}: {m}" for n, m in sorted(driver.training_failed.items())]
    reconstructions = {t.name: t.entries["reconstruction"] for t in tracks
                       if t.status in RECONSTRUCTED and "reconstruction" in t.entries}
    stack = run_level("stack", {"reconstructions": reconstructions}) if reconstructions else None
    events = {t.name: t.entries["events"] for t in tracks if "events" in t.entries}
    archive_events = run_level("archive_events", {"all_events": events}) if events else None
    timings = [{"core_id": t.name, "stage": s, "seconds": t.seconds[s], "reused": t.cached.get(s, False)}
               for t in tracks for s in ("series", *CORE_STAGES, *PUBLISH_STAGES) if s in t.seconds]
    return {"cores": [t.row() for t in tracks], "timings": timings, "training": driver.training,
            "stack": stack, "archive_events": archive_events, "notes": notes,
            "known_hashes": driver.known_hashes, "series": sorted(driver.series)}


@flow(name="downcore-core", validate_parameters=False, persist_result=False, log_prints=False)
def core_flow(plan: RunPlan, folder: str, run_dir: str, cache_dir: str, recompute: bool = False) -> dict:
    """One core through every stage (ingest -> ... -> outputs), sequentially; returns its
    summary row. The archive flow runs the same tasks for many cores at once."""
    single = RunPlan(**{**plan.__dict__, "core_folders": (str(pathlib.Path(folder).resolve()),)})
    driver = _Driver(single, run_dir, WorkStore(cache_dir), recompute, _Silent(), with_series=False)
    return driver.run()[0].row()
