"""The archive flow: every core of a run through every stage, concurrently, failures isolated.

Built from the stage table (:mod:`pipelines.flows.stage_table`) with plain Prefect futures:

1. the training sets are submitted first (fitted once, shared by every calibration);
2. every core's ingest (and every dated series' ``series`` stage) is submitted; their outcomes
   are read in core order, which gives each core its id (a second core with the same id
   fails here, before any of its science runs) and publishes the cores that stopped;
3. every later stage of every core is submitted with its upstream stages' futures as inputs
   (wrapped in ``allow_failure``: a stage whose needed input failed or was skipped returns
   :data:`~pipelines.flows.stage_table.NOT_RUN` without running, and the core is reported
   as failed at -- or skipped at -- the stage that stopped it). Stages found in the work store
   are looked up in the flow instead of submitted. On threads the submission order is a
   wavefront (:data:`WAVE_LAG_CORES`): a stage's upstream is always submitted well before it,
   so a worker thread seldom waits for an input, and the first cores finish early rather
   than all at the end;
4. ``as_completed`` hands back the futures as they finish; a core whose stages are all done
   is recorded (:mod:`pipelines.flows.tracks`) and its folder published at once (in the
   flow's own thread: hard links), so in a long run results appear core by core;
5. the run-level stages follow: the regional stack, then the archive-wide events.

Dated series (``[series.<name>]``) are cores whose reconstruction is their ``series`` stage:
their events, folder, stack and lead/lag follow as for a core. The flow returns one summary
row per core (and series); it never fails because a core failed.

Concurrency is the task runner's: ``ThreadPoolTaskRunner(max_workers=N)`` by default or a
``DaskTaskRunner`` (see :mod:`pipelines.flows.runners`). On Dask the light stages run in the
flow's process and a few cores' stages after ingest go to a worker as one task
(:data:`CHAIN_BATCH_CORES`). Results do not depend on any of it: every random stream is
``rng_for(run_seed, stage, core_id)``, and tables are written in a fixed order.
"""

from __future__ import annotations

import pathlib
from dataclasses import dataclass, field
from typing import Any

from prefect import allow_failure, flow
from prefect.futures import PrefectFuture, as_completed

from pipelines.flows import stages, tasks
from pipelines.flows.plan import RunPlan
from pipelines.flows.stage_table import (COLLECTIONS, CORE_STAGES, NOT_RUN, PUBLISH_STAGES, SCIENCE_STAGES, STAGES,
                                         call_stage, probe_stage, take_inputs)
from pipelines.flows.status import RECONSTRUCTED
from pipelines.flows.store import WorkStore
from pipelines.flows.tracks import (CoreTrack, log_text, published_entries, record_first, record_rest)

__all__ = ["archive_flow", "core_flow", "collect_run", "CoreTrack", "Submitter", "Finished", "register_observer",
           "unregister_observer", "run_cores"]

#: on Dask, up to this many cores' stages go to a worker as one task: each task run costs
#: orchestration CPU in the flow process and the Prefect server (~0.1-0.2 s, measured)
#: that on a small machine competes with the workers
CHAIN_BATCH_CORES = 4
#: stage ``d`` (after ingest) of core ``i`` is submitted at position ``i + d * WAVE_LAG_CORES``:
#: on threads a task waits in its worker for its inputs, and this many cores' worth of
#: other stages between a stage and its upstream keep that wait rare
WAVE_LAG_CORES = 8

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
    run): quacks like a completed future."""

    def __init__(self, value: Any):
        self.value = value

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
                 inline_stages: tuple[str, ...] = (), chain: bool = False):
        self.plan, self.run_dir, self.store, self.recompute = plan, run_dir, store, recompute
        self.inline_stages, self.chain = frozenset(inline_stages), chain

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
        kwargs = {"plan": self.plan, "label": label, "entries": entries, "store": self.store,
                  "recompute": self.recompute}
        if inline:
            return Finished(task(**kwargs, return_state=True).result(raise_on_failure=False))
        return task.submit(**kwargs)

    def chain_cores(self, label: str, chains: list[dict]) -> Any:
        """Every stage after ingest of a few cores as one task (:func:`tasks.core_chain_task`)."""
        chains = [{name: _given(name, value) for name, value in entries.items()} for entries in chains]
        return tasks.core_chain_task.submit(plan=self.plan, label=label, chains=chains, store=self.store,
                                            recompute=self.recompute)

    def publish(self, track: CoreTrack) -> Any:
        """Publish a core's folder (a task run in the flow's thread); its outcome."""
        state = tasks.outputs_task(run_dir=self.run_dir, label=track.name, entries=published_entries(track),
                                   log_text=log_text(track), return_state=True)
        return state.result(raise_on_failure=False)

    def run_level(self, stage: str, entries: dict) -> Any:
        """A run-level stage not found in the work store, computed: the stack as a task of
        the flow, the archive events inline (light work on small tables). Its result, or the
        exception it failed with."""
        if stage == "stack":
            future = tasks.STAGE_TASKS[stage].submit(plan=self.plan, label="all-cores", entries=entries,
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
        self.pending: dict[int, set] = {}  # id(track) -> its unfinished futures
        self.results: dict[int, dict[str, Any]] = {}  # id(track) -> stage -> future

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

    def start(self) -> list[CoreTrack]:
        """Ingest every core (and read every series); the cores that go on, with their ids."""
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
        going = []
        for track, first in firsts:
            self.state.tracks.append(track)
            if record_first(track, outcome(first), ids):
                going.append(track)
            else:
                self.finish(track, {})
        return going

    def entries(self, track: CoreTrack) -> dict[str, Any]:
        known = {stage: Finished(entry) for stage, entry in track.entries.items()}
        return {**known, **self.results[id(track)], "folder": track.folder, "training": self.training}

    def submit(self, going: list[CoreTrack]) -> None:
        """Submit every later stage of every core (wavefront order, chains on Dask)."""
        order = []
        chains: list[CoreTrack] = []
        for position, track in enumerate(going):
            self.results[id(track)] = {}
            left = track.stages_left()
            if self.sub.chain and left[:1] == SCIENCE_STAGES[:1] and self.sub.found(
                    left[0], {"ingest": track.entries["ingest"]}) is None:
                chains.append(track)
                continue
            order += [(position + depth * WAVE_LAG_CORES, -depth, position, stage) for depth, stage in enumerate(left)]
        for _, _, position, stage in sorted(order):
            track = going[position]
            future = self.sub.stage(stage, track.name, self.entries(track))
            self.results[id(track)][stage] = future
        for start in range(0, len(chains), CHAIN_BATCH_CORES):
            self._submit_chain(chains[start:start + CHAIN_BATCH_CORES])

    def _submit_chain(self, batch: list[CoreTrack]) -> None:
        label = batch[0].name if len(batch) == 1 else f"{batch[0].name}..{batch[-1].name}"
        future = self.sub.chain_cores(label, [{"ingest": Finished(t.entries["ingest"]), "folder": t.folder,
                                               "training": self.training} for t in batch])
        for position, track in enumerate(batch):
            self.results[id(track)] = {"chain": (future, position)}

    def collect(self, going: list[CoreTrack]) -> None:
        """Record and publish each core as soon as all its futures are done."""
        owners: dict[Any, list[CoreTrack]] = {}
        for track in going:
            for future in self._futures(track):
                owners.setdefault(future, []).append(track)
            self.pending[id(track)] = set(self._futures(track))
        for track in going:
            self._progress(track)
        for future in as_completed(list(owners)):
            for track in owners[future]:
                self.pending[id(track)].discard(future)
                self._progress(track)

    def _progress(self, track: CoreTrack) -> None:
        """Tell the observer the stage a core is at; finish a core with nothing pending."""
        if not self.pending[id(track)]:
            self.finish(track, self._outcomes(track))
            return
        for stage, value in self.results[id(track)].items():
            if (value[0] if isinstance(value, tuple) else value) in self.pending[id(track)]:
                self.observer.stage(track.label, SCIENCE_STAGES[0] if stage == "chain" else stage)
                return

    def _futures(self, track: CoreTrack) -> list:
        found = []
        for value in self.results[id(track)].values():
            future = value[0] if isinstance(value, tuple) else value
            if isinstance(future, PrefectFuture) and future not in found:
                found.append(future)
        return found

    def _outcomes(self, track: CoreTrack) -> dict[str, Any]:
        results = self.results[id(track)]
        if "chain" not in results:
            return {stage: outcome(future) for stage, future in results.items()}
        future, position = results["chain"]
        chained = outcome(future)
        if isinstance(chained, BaseException):
            return {SCIENCE_STAGES[0]: chained}
        return {stage: tasks.StageFailed(result["failed"]) if "failed" in result else result
                for stage, result in chained[position]}

    def finish(self, track: CoreTrack, results: dict[str, Any]) -> None:
        """Record a core's outcomes and publish its folder."""
        record_rest(track, results, self.training_note)
        published = self.sub.publish(track)
        if isinstance(published, BaseException):
            track.status, track.error = "failed", f"writing outputs: {published}"
        else:
            self.state.known_hashes.update(published.get("known_hashes", {}))
        self.observer.finished(track)


def run_cores(submitter: Submitter, observer: Any = None, with_series: bool = True) -> RunState:
    """Every core (and dated series) of the submitter's plan through every stage, each
    published when done; see the module docstring."""
    observer = observer or _Silent()
    observer.started(len(submitter.plan.core_folders))
    cores = _Cores(submitter, observer, with_series)
    going = cores.start()
    cores.submit(going)
    cores.collect(going)
    cores.training_note()  # every training set's outcome, whether a core needed it or not
    return cores.state


@flow(name="downcore-archive", validate_parameters=False, persist_result=False, log_prints=False)
def archive_flow(plan_id: str, run_dir: str, cache_dir: str, recompute: bool = False,
                 observer_id: str | None = None, inline_stages: tuple[str, ...] = (),
                 chain: bool = False) -> dict:
    """Run every core of the plan registered as ``plan_id`` (:func:`register_plan`) into
    ``run_dir`` (see the module docstring).

    ``inline_stages`` run as task runs in the flow's own process, when their inputs are known
    there, instead of being submitted to the task runner. On Dask, where a submitted task
    costs ~60-80 ms (measured, see ../shared/PREFECT.md), the light stages (ingest ~0.05 s,
    calibration ~0.1 s) are run inline so that the workers spend their time on the heavy
    ones, and with ``chain`` a core's stages after ingest go to a worker as one task (each
    stage still cached on its own).

    Returns
    -------
    dict
        ``cores``: one summary row per core (in core-folder order), ``timings``: one row per
        core and stage (seconds, reused from cache or not), ``training``: entry per training
        set, ``stack``: the stack entry or ``None``, ``notes``: run-level notes.
    """
    plan = _PLANS[plan_id]
    observer = _OBSERVERS.get(observer_id or "", _Silent())
    submitter = Submitter(plan, run_dir, WorkStore(cache_dir), recompute, tuple(inline_stages), chain)
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
    single = RunPlan(**{**plan.__dict__, "core_folders": (str(pathlib.Path(folder).resolve()),)})
    state = run_cores(Submitter(single, run_dir, WorkStore(cache_dir), recompute), with_series=False)
    return state.tracks[0].row()
