"""The archive flow: every core of a run through every stage, concurrently, failures isolated.

Built from the stage table (:mod:`pipelines.flows.stage_table`) with plain Prefect futures:

1. the training sets are submitted first (fitted once, shared by every calibration);
2. every core's ingest (and every dated series' ``series`` stage) is submitted; their outcomes
   are read in core order, which gives each core its id (a second core with the same id
   fails here, before any of its science runs) and publishes the cores that stopped;
3. as soon as a core's first stage is known, its later stages are looked up in the work
   store (in the flow, while their inputs are known there), and the stages from the first one
   that must run go to the task runner as one chained task (:mod:`pipelines.flows.chain`),
   with the training sets' futures as inputs (wrapped in ``allow_failure``: a stage whose
   needed input failed or was skipped returns :data:`~pipelines.flows.stage_table.NOT_RUN`
   without running, and the core is reported as failed at -- or skipped at -- the stage that
   stopped it). Each stage keeps its own work-store entry and timing. One task per core
   instead of one per stage: every task run costs orchestration CPU in this process and in
   the Prefect server, which a small machine takes from the science;
4. ``as_completed`` hands back the futures as they finish; a core whose stages are all done
   is recorded (:mod:`pipelines.flows.tracks`) and its folder published at once (in the
   flow's own thread: hard links), so in a long run results appear core by core;
5. the run-level stages follow: the regional stack, then the archive-wide events.

Dated series (``[series.<name>]``) are cores whose reconstruction is their ``series`` stage:
their events, folder, stack and lead/lag follow as for a core. The flow returns one summary
row per core (and series); it never fails because a core failed.

Concurrency is the task runner's: ``ThreadPoolTaskRunner(max_workers=N)`` by default or a
``DaskTaskRunner`` (see :mod:`pipelines.flows.runners`). On Dask ingest runs in the flow's
process and a few cores' chains go to a worker as one task (:data:`CHAIN_BATCH_CORES`).
The run plan is handed to the tasks ``quote``-d: Prefect then does not walk through it (every
input file with its hash) for each task run, which made the orchestration grow with the square
of the number of cores (on Dask, whose tasks hold several cores' chains, it goes bare: the
annotation reached the task there as a plain tuple). Results do not depend on any of it: every random stream is
``rng_for(run_seed, stage, core_id)``, and tables are written in a fixed order.
"""

from __future__ import annotations

import dataclasses
import pathlib
from dataclasses import dataclass, field
from typing import Any

from prefect import allow_failure, flow
from prefect.futures import PrefectFuture, as_completed
from prefect.utilities.annotations import quote

from pipelines.flows import stages, tasks
from pipelines.flows.plan import RunPlan
from pipelines.flows.stage_table import (COLLECTIONS, CORE_STAGES, NOT_RUN, PUBLISH_STAGES, SCIENCE_STAGES, STAGES,
                                         call_stage, probe_stage, take_inputs)
from pipelines.flows.status import RECONSTRUCTED
from pipelines.flows.store import WorkStore
from pipelines.flows.tracks import (CoreTrack, log_text, published_entries, record_first, record_rest)

__all__ = ["archive_flow", "core_flow", "collect_run", "CoreTrack", "Submitter", "Finished", "register_observer",
           "unregister_observer", "run_cores"]

#: on Dask, up to this many cores' chains go to a worker as one task: each task run costs
#: orchestration CPU in the flow process and the Prefect server (~0.1-0.2 s, measured)
#: that on a small machine competes with the workers (threads: one core per task)
CHAIN_BATCH_CORES = 4


def tail_batch(batch: int, cores_left: int) -> int:
    """Cores per chained task when ``cores_left`` cores (queued ones included) are still to
    be submitted: ``batch``, but never more than a quarter of those left, so the last tasks
    are single cores and the workers finish together (with 25 tasks of 4 cores on 2 workers
    one worker ran a whole task, ~6 s, alone at the end)."""
    return max(1, min(batch, cores_left // 4))


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
    def finished(self, track: CoreTrack) -> None: ...


class Finished:
    """A stage outcome known in the flow (found in the work store, run inline, or nothing to
    run): quacks like a completed future. With ``compute`` the outcome is computed when
    first asked for (a stage run inline in the flow's process, in core order)."""

    def __init__(self, value: Any = None, compute: Any = None):
        self._value, self._compute = value, compute

    @property
    def value(self) -> Any:
        if self._compute is not None:
            self._value, self._compute = self._compute(), None
        return self._value

    def result(self, raise_on_failure: bool = False) -> Any:
        return self.value


def outcome(future: Any) -> Any:
    """A finished future's outcome: its entry, ``{"skipped": ...}``, or the exception it
    failed with (also when the task runner lost it)."""
    try:
        return future.result(raise_on_failure=False)
    except Exception as error:  # noqa: BLE001 - a task that never ran: its core fails there
        return RuntimeError(f"the task did not finish: {stages.problem_text(error)}")


def _known(name: str, value: Any) -> bool:
    """Whether input ``name``'s value is known in the flow (no future in it)."""
    if name in COLLECTIONS:
        return not any(isinstance(v, PrefectFuture) for v in value.values())
    return not isinstance(value, PrefectFuture)


def _given(name: str, value: Any) -> Any:
    """Input ``name`` as a task gets it: known values as they are, futures as
    ``allow_failure`` (a failed or skipped input then reaches the stage, which does not run:
    :func:`pipelines.flows.stage_table.take_inputs`)."""
    if name in COLLECTIONS:
        return {member: _given("", v) for member, v in sorted(value.items())}
    if isinstance(value, Finished):
        return value.value
    if isinstance(value, PrefectFuture):
        return allow_failure(value)
    return value


class Submitter:
    """How the flow gets a stage's outcome: looked up in the work store, run inline in the
    flow's process, or submitted to the task runner (a future)."""

    def __init__(self, plan: RunPlan, run_dir: str, store: WorkStore, recompute: bool = False,
                 inline_stages: tuple[str, ...] = (), batch: int = 1):
        self.plan, self.run_dir, self.store, self.recompute = plan, run_dir, store, recompute
        self.inline_stages, self.batch = frozenset(inline_stages), max(1, int(batch))
        # quoted, Prefect does not walk the plan's inputs on every task run; batched chains
        # (Dask) get it bare: there the annotation reached the task as a plain tuple
        self.plan_for_tasks = quote(plan) if self.batch == 1 else plan

    def stage(self, stage: str, label: str, entries: dict[str, Any]) -> Any:
        """Stage ``stage`` of ``label`` on ``entries`` (values, :class:`Finished` or futures)."""
        wanted = {name: entries[name] for name in STAGES[stage].inputs}
        known = all(_known(name, value) for name, value in wanted.items())
        given = {name: _given(name, value) for name, value in wanted.items()}
        if known:
            if take_inputs(STAGES[stage], given) is None:
                return Finished(dict(NOT_RUN))
            found = self.found(stage, given)
            if found is not None:
                return Finished(found)
        return self._run(stage, label, given, inline=known and stage in self.inline_stages)

    def found(self, stage: str, entries: dict) -> dict | None:
        """The stage's finished entry in the work store (``None``: it must run)."""
        return None if self.recompute else probe_stage(stage, self.plan, entries, self.store)

    def _run(self, stage: str, label: str, entries: dict, inline: bool) -> Any:
        task = tasks.STAGE_TASKS[stage]
        kwargs = {"plan": self.plan_for_tasks, "label": label, "entries": entries, "store": self.store,
                  "recompute": self.recompute}
        if inline:
            return Finished(compute=lambda: task(**kwargs, return_state=True).result(raise_on_failure=False))
        return task.submit(**kwargs)

    def chain_cores(self, label: str, chains: list[tuple[tuple[str, ...], dict]]) -> Any:
        """The given stages of a few cores as one task (:func:`tasks.core_chain_task`); each
        chain is ``(stages, entries)``."""
        chains = [(stages_left, {name: _given(name, value) for name, value in entries.items()})
                  for stages_left, entries in chains]
        return tasks.core_chain_task.submit(plan=self.plan_for_tasks, label=label, chains=chains, store=self.store,
                                            recompute=self.recompute)

    def publish(self, tracks: list[CoreTrack]) -> list[dict]:
        """Publish the folders of cores whose chains ended together (one task run in the
        flow's thread: on Dask a chained task holds a few cores); one outcome per core, its
        published files or ``{"failed": message}``."""
        names = [track.name for track in tracks]
        label = names[0] if len(names) == 1 else f"{names[0]}..{names[-1]}"
        folders = [(track.name, published_entries(track), log_text(track)) for track in tracks]
        state = tasks.outputs_task(run_dir=self.run_dir, label=label, folders=folders, return_state=True)
        result = state.result(raise_on_failure=False)
        if isinstance(result, BaseException):
            return [{"failed": str(result)} for _ in tracks]
        return result

    def run_level(self, stage: str, entries: dict) -> Any:
        """A run-level stage not found in the work store, computed: the stack as a task of
        the flow, the archive events inline (light work on small tables). Its result, or the
        exception it failed with."""
        if stage == "stack":
            future = tasks.STAGE_TASKS[stage].submit(plan=self.plan_for_tasks, label="all-cores", entries=entries,
                                                     store=self.store, recompute=self.recompute)
            return future.result(raise_on_failure=False)
        try:
            return call_stage(stage, self.plan, entries, self.store, self.recompute)
        except stages.StageSkipped as skipped:
            return {"skipped": str(skipped)}
        except Exception as error:  # noqa: BLE001 - the per-core outputs stay valid
            return RuntimeError(stages.problem_text(error))


@dataclass
class RunState:
    """The cores of a run once every stage ran, with the training sets' outcomes."""

    tracks: list[CoreTrack]
    training: dict[str, dict] = field(default_factory=dict)
    training_failed: dict[str, str] = field(default_factory=dict)
    known_hashes: dict[str, tuple[int, int, str]] = field(default_factory=dict)
    series: list[str] = field(default_factory=list)


class _Cores:
    """One run of every core through its stages (see the module docstring)."""

    def __init__(self, submitter: Submitter, observer: Any, with_series: bool):
        self.sub, self.observer, self.plan = submitter, observer, submitter.plan
        names = sorted(self.plan.auxiliary.get("training", {}))
        self.training = {name: submitter.stage("training", name, {"name": name}) for name in names}
        self._training_note: str | None = None
        self.series = dict(self.plan.auxiliary.get("series", {})) if with_series else {}
        self.state = RunState(tracks=[], series=sorted(self.series))
        self.going: list[CoreTrack] = []
        self.results: dict[int, dict[str, Any]] = {}  # id(track) -> stage (or "chain") -> outcome
        self._batch: list[tuple[CoreTrack, tuple[str, ...], dict]] = []

    def training_note(self) -> str:
        """The note of a core calibrated without the failed training sets ('' when none)."""
        if self._training_note is None:
            for name, future in sorted(self.training.items()):
                result = outcome(future)
                if isinstance(result, BaseException):
                    self.state.training_failed[name] = str(result)
                elif "skipped" in result:
                    self.state.training_failed[name] = result["skipped"]
                else:
                    self.state.training[name] = result
            failed = self.state.training_failed
            note = "; ".join(f"training set {n} failed: {m}" for n, m in sorted(failed.items()))
            self._training_note = f"calibration without the failed training sets ({note})" if note else ""
        return self._training_note

    def start(self) -> None:
        """Ingest every core (and read every series), then, in core order, give each core its
        id and submit the rest of its stages as soon as its first one is known."""
        firsts = []
        for folder in self.plan.core_folders:
            track = CoreTrack(folder=folder, label=pathlib.Path(folder).name)
            track.say(f"core folder {folder}")
            self.observer.stage(track.label, "ingest")
            firsts.append((track, self.sub.stage("ingest", track.label, {"folder": folder})))
        for name, (path, _) in sorted(self.series.items()):
            track = CoreTrack(folder=path, label=name, is_series=True)
            track.say(f"dated series {name}: {path}")
            firsts.append((track, self.sub.stage("series", name, {"name": name})))
        ids: dict[str, str] = {}
        for position, (track, first) in enumerate(firsts):
            self.state.tracks.append(track)
            if record_first(track, outcome(first), ids):
                self.going.append(track)
                self._submit(track, still_to_queue=len(firsts) - position)
            else:
                self.finish([track], [{}])
        self._flush()

    def entries(self, track: CoreTrack) -> dict[str, Any]:
        known = {stage: Finished(entry) for stage, entry in track.entries.items()}
        return {**known, **self.results[id(track)], "folder": track.folder, "training": self.training}

    def _submit(self, track: CoreTrack, still_to_queue: int) -> None:
        """Look the core's next stages up in the work store while their inputs are known in
        the flow; queue the rest as the core's chain (see the module docstring).
        ``still_to_queue``: this core and those after it (at most)."""
        self.results[id(track)] = found = {}
        left = list(track.stages_left())
        while left:
            stage = left[0]
            wanted = {name: self.entries(track)[name] for name in STAGES[stage].inputs}
            if not all(_known(name, value) for name, value in wanted.items()):
                break
            given = {name: _given(name, value) for name, value in wanted.items()}
            entry = dict(NOT_RUN) if take_inputs(STAGES[stage], given) is None else self.sub.found(stage, given)
            if entry is None:
                break
            found[stage] = Finished(entry)
            left.pop(0)
        if left:
            self._batch.append((track, tuple(left), self.entries(track)))
            if len(self._batch) >= tail_batch(self.sub.batch, still_to_queue - 1 + len(self._batch)):
                self._flush()

    def _flush(self) -> None:
        """Submit the queued chains as one task."""
        if not self._batch:
            return
        batch, self._batch = self._batch, []
        names = [track.name for track, _, _ in batch]
        label = names[0] if len(names) == 1 else f"{names[0]}..{names[-1]}"
        future = self.sub.chain_cores(label, [(left, entries) for _, left, entries in batch])
        for position, (track, left, _) in enumerate(batch):
            self.results[id(track)]["chain"] = (future, position, left)

    def collect(self) -> None:
        """Record and publish each core as soon as its chain is done."""
        owners: dict[Any, list[CoreTrack]] = {}
        for track in self.going:
            chain = self.results[id(track)].get("chain")
            if chain is None:
                self.finish([track], [self._outcomes(track)])  # every stage found in the work store
                continue
            owners.setdefault(chain[0], []).append(track)
            self.observer.stage(track.label, SCIENCE_STAGES[0])
        for future in as_completed(list(owners)):
            self.finish(owners[future], [self._outcomes(track) for track in owners[future]])

    def _outcomes(self, track: CoreTrack) -> dict[str, Any]:
        results = dict(self.results[id(track)])
        chain = results.pop("chain", None)
        outcomes = {stage: outcome(value) for stage, value in results.items()}
        if chain is None:
            return outcomes
        future, position, left = chain
        chained = outcome(future)
        if isinstance(chained, BaseException):
            return {**outcomes, left[0]: chained}
        return {**outcomes, **{stage: tasks.StageFailed(result["failed"]) if "failed" in result else result
                               for stage, result in chained[position]}}

    def finish(self, tracks: list[CoreTrack], results: list[dict[str, Any]]) -> None:
        """Record the outcomes of cores that ended together and publish their folders."""
        for track, outcomes in zip(tracks, results):
            record_rest(track, outcomes, self.training_note)
        for track, published in zip(tracks, self.sub.publish(tracks)):
            if "failed" in published:
                track.status, track.error = "failed", f"writing outputs: {published['failed']}"
            else:
                self.state.known_hashes.update(published.get("known_hashes", {}))
            self.observer.finished(track)


def run_cores(submitter: Submitter, observer: Any = None, with_series: bool = True) -> RunState:
    """Every core (and dated series) of the submitter's plan through every stage, each
    published when done; see the module docstring."""
    observer = observer or _Silent()
    observer.started(len(submitter.plan.core_folders))
    cores = _Cores(submitter, observer, with_series)
    cores.start()
    cores.collect()
    cores.training_note()  # every training set's outcome, whether a core needed it or not
    return cores.state


@flow(name="downcore-archive", validate_parameters=False, persist_result=False, log_prints=False)
def archive_flow(plan_id: str, run_dir: str, cache_dir: str, recompute: bool = False,
                 observer_id: str | None = None, inline_stages: tuple[str, ...] = (),
                 batch_chains: bool = False) -> dict:
    """Run every core of the plan registered as ``plan_id`` (:func:`register_plan`) into
    ``run_dir`` (see the module docstring).

    ``inline_stages`` run as task runs in the flow's own process, when their inputs are known
    there, instead of being submitted to the task runner. On Dask, where a submitted task
    costs ~60-80 ms (measured, see ../shared/PREFECT.md), ingest (~0.05 s) is run inline, core
    by core, while the workers already run the chains of the cores before, and with
    ``batch_chains`` a task holds the chains of :data:`CHAIN_BATCH_CORES` cores (each stage
    still cached on its own).

    Returns
    -------
    dict
        ``cores``: one summary row per core (in core-folder order), ``timings``: one row per
        core and stage (seconds, reused from cache or not), ``training``: entry per training
        set, ``stack``: the stack entry or ``None``, ``notes``: run-level notes.
    """
    plan = _PLANS[plan_id]
    observer = _OBSERVERS.get(observer_id or "", _Silent())
    submitter = Submitter(plan, run_dir, WorkStore(cache_dir), recompute, tuple(inline_stages),
                          CHAIN_BATCH_CORES if batch_chains else 1)
    return collect_run(submitter, run_cores(submitter, observer))


def collect_run(submitter: Submitter, state: RunState) -> dict:
    """The run-level stages (stack, archive events) after every core, and the flow's result
    (see :func:`archive_flow`). A run-level stage found in the work store is taken from it;
    any other is ``submitter.run_level(stage, entries)``."""
    notes: list[str] = [f"training set {n}: {m}" for n, m in sorted(state.training_failed.items())]

    def run_level(stage: str, entries: dict) -> dict | None:
        """The stage's entry, or ``None`` with a note when it failed or was skipped."""
        found = submitter.found(stage, entries)
        result = found if found is not None else submitter.run_level(stage, entries)
        if isinstance(result, BaseException):
            notes.append(f"{stage.replace('_', ' ')} failed: {result}")
            return None
        if "skipped" in result:
            notes.append(result["skipped"])
            return None
        return result

    tracks = state.tracks
    reconstructions = {t.name: t.entries["reconstruction"] for t in tracks
                       if t.status in RECONSTRUCTED and "reconstruction" in t.entries}
    stack = run_level("stack", {"reconstructions": reconstructions}) if reconstructions else None
    events = {t.name: t.entries["events"] for t in tracks if "events" in t.entries}
    archive_events = run_level("archive_events", {"all_events": events}) if events else None
    timings = [{"core_id": t.name, "stage": s, "seconds": t.seconds[s], "reused": t.cached.get(s, False)}
               for t in tracks for s in ("series", *CORE_STAGES, *PUBLISH_STAGES) if s in t.seconds]
    return {"cores": [t.row() for t in tracks], "timings": timings, "training": state.training,
            "stack": stack, "archive_events": archive_events, "notes": notes,
            "known_hashes": state.known_hashes, "series": state.series}


@flow(name="downcore-core", validate_parameters=False, persist_result=False, log_prints=False)
def core_flow(plan: RunPlan, folder: str, run_dir: str, cache_dir: str, recompute: bool = False) -> dict:
    """One core through every stage (ingest -> ... -> outputs); returns its summary row.
    The archive flow runs the same tasks for many cores at once."""
    single = dataclasses.replace(plan, core_folders=(str(pathlib.Path(folder).resolve()),))
    state = run_cores(Submitter(single, run_dir, WorkStore(cache_dir), recompute), with_series=False)
    return state.tracks[0].row()
