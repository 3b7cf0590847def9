"""Worker processes for the science of a local run (the Prefect tasks stay on threads).

The science stages are mostly pure Python and hold the interpreter lock, so the default
thread runner runs two cores' chronologies one after the other (measured: two threads took as
long as one after the other). A :class:`SciencePool` runs the stage itself in a worker process
instead: the Prefect task, still on its thread, sends the stage's name, the run plan's file
and the small entry descriptions of its inputs (paths and hashes), and waits (the lock
released) while the worker reads the inputs from the work store (once per worker process,
:mod:`pipelines.flows.shared`), computes, writes its work-store entry and returns the entry's
small description. Nothing large crosses a pipe, and the bytes written are those of the same
runner called in this process: every random draw comes from ``rng_for(run_seed, stage,
core_id)`` and BLAS is pinned to one thread in every process.

The pool is started when a run's flow starts, so that the workers are ready when the
temporary Prefect server is, and ended as soon as the flow has returned. The workers are
forked from downcore's fork server (:func:`pipelines.spawning.helper_context`), which has the
science imported once for all of them (spawned, each would spend ~1.5 s of CPU importing it).

How many workers (:func:`pool_size`): ``$DOWNCORE_SCIENCE_PROCESSES`` when set (``0``: none,
the science runs in the tasks' threads); otherwise as many as there are CPUs, at most the
run's thread count and its number of cores, and none when that is one.

A worker that dies (killed, out of memory) breaks the pool: every stage it held is tried once
more in a fresh pool, so only a stage that kills its worker twice fails, with a message that
says so; the other cores go on. A worker never outlives the process that started it.
"""

from __future__ import annotations

import concurrent.futures
import contextlib
import os
import pickle
import shutil
import signal
import tempfile
import threading
import time
from concurrent.futures.process import BrokenProcessPool
from typing import Any, Iterator

from pipelines.spawning import helper_context, main_script_not_rerun

__all__ = ["SciencePool", "POOL_STAGES", "PROCESSES_ENV", "pool_size", "science_pool_for_run",
           "active_pool"]

#: environment variable: science worker processes (0 = the science runs in the tasks' threads)
PROCESSES_ENV = "DOWNCORE_SCIENCE_PROCESSES"

#: stages whose work runs in a worker process (the stack too: the workers have its science
#: imported; the archive events, light, and the publishing of a core's folder stay in the
#: flow's process)
POOL_STAGES = frozenset({"training", "series", "ingest", "chronology", "calibration", "reconstruction",
                         "events", "samples", "stack"})

#: seconds between a worker's checks that the process that started it is still alive
PARENT_POLL_SECONDS = 0.5


def pool_size(threads: int, units: int, cpus: int | None = None) -> int:
    """Worker processes for a run of ``units`` cores (and dated series) on ``threads`` task
    threads: ``$DOWNCORE_SCIENCE_PROCESSES`` when set, else ``min(CPUs, threads, units)``,
    and 0 (no pool) on one CPU or one thread. A one-core run gets one worker: its head start
    (:mod:`pipelines.flows.head_start`) overlaps the Prefect server's start-up."""
    text = os.environ.get(PROCESSES_ENV, "").strip()
    if text:
        try:
            wanted = int(text)
        except ValueError:
            raise ValueError(f"${PROCESSES_ENV}={text!r}: expected a whole number of worker processes "
                             "(0 runs the science in the tasks' threads)") from None
        return max(0, wanted)
    cpus = cpus if cpus is not None else _available_cpus()
    if cpus < 2 or int(threads) < 2:
        return 0
    return max(0, min(cpus, int(threads), int(units)))


def _available_cpus() -> int:
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - not Linux
        return os.cpu_count() or 1


# --- the worker side ---------------------------------------------------------------------

_PLANS: dict[str, Any] = {}


def _is_alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # pragma: no cover - a process of another user has that pid now
        return False
    return True


def _worker_setup(run_pid: int) -> None:
    """In each worker: Ctrl-C is the run's to handle, BLAS on one thread, and an exit as soon
    as the run's process is gone (however it ended, ``kill -9`` included). The worker's parent
    is the run's process when spawned, the fork server when forked
    (:func:`pipelines.spawning.helper_context`), which exits with the run: the worker
    leaves when its parent changes or the run's process is gone."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    from pipelines.flows.stages import pin_blas_threads

    pin_blas_threads()
    parent = os.getppid()

    def watch() -> None:
        while os.getppid() == parent and _is_alive(run_pid):
            time.sleep(PARENT_POLL_SECONDS)
        os._exit(1)

    threading.Thread(target=watch, name="downcore-parent-watch", daemon=True).start()


def _warm_up() -> int:
    """Import the stages' science while the Prefect server starts; returns the worker's pid."""
    import pipelines.flows.stage_table  # noqa: F401
    import pipelines.ingest  # noqa: F401
    import proxies.calibration.stage  # noqa: F401
    import proxies.chronology.stage  # noqa: F401
    import proxies.events.stage  # noqa: F401
    import proxies.reconstruction.stage  # noqa: F401

    return os.getpid()


def _plan_from(path: str) -> Any:
    plan = _PLANS.get(path)
    if plan is None:
        with open(path, "rb") as handle:
            plan = pickle.load(handle)
        if len(_PLANS) >= 4:
            _PLANS.pop(next(iter(_PLANS)))
        _PLANS[path] = plan
    return plan


def _run_stage(name: str, plan_path: str, entries: dict, store_root: str, recompute: bool) -> dict:
    """In a worker: run stage ``name``; its outcome (:func:`pipelines.flows.chain.stage_outcome`:
    nothing but strings and small dicts come back)."""
    from pipelines.flows.chain import stage_outcome
    from pipelines.flows.store import WorkStore

    return stage_outcome(name, _plan_from(plan_path), entries, WorkStore(store_root), recompute)


def _run_chain(plan_path: str, stages: tuple[str, ...], entries: dict, store_root: str,
               recompute: bool) -> list[tuple[str, dict]]:
    """In a worker: a core's chain of stages (:func:`pipelines.flows.chain.run_core_chain`)."""
    from pipelines.flows.chain import run_core_chain
    from pipelines.flows.store import WorkStore

    return run_core_chain(_plan_from(plan_path), stages, entries, WorkStore(store_root), recompute)


def _head_start(plan_path: str, store_root: str, side_root: str, folder: str) -> None:
    """In a worker: the head start of one core (:func:`pipelines.flows.head_start.run_head_start`)."""
    from pipelines.flows.head_start import run_head_start

    run_head_start(_plan_from(plan_path), store_root, side_root, folder)


# --- the parent side ---------------------------------------------------------------------

class SciencePool:
    """``size`` spawned worker processes running stages (see the module docstring).

    Parameters
    ----------
    size : int
        Worker processes (at least 1).
    """

    def __init__(self, size: int):
        self.size = max(1, int(size))
        self._lock = threading.Lock()
        self._folder = tempfile.mkdtemp(prefix="downcore-science-")
        self._plans: dict[int, tuple[Any, str]] = {}
        self._executor = self._new_executor()
        self._head: Any = None

    def _new_executor(self) -> concurrent.futures.ProcessPoolExecutor:
        executor = concurrent.futures.ProcessPoolExecutor(
            max_workers=self.size, mp_context=helper_context(),
            initializer=_worker_setup, initargs=(os.getpid(),))
        with main_script_not_rerun():  # workers are spawned on demand: all of them now
            for _ in range(self.size):
                executor.submit(_warm_up)
        return executor

    def _plan_file(self, plan: Any) -> str:
        """The plan pickled once into the pool's folder (read once per worker)."""
        with self._lock:
            known = self._plans.get(id(plan))
            if known is not None and known[0] is plan:
                return known[1]
            path = os.path.join(self._folder, f"plan-{len(self._plans)}-{os.getpid()}.pkl")
            with open(path + ".tmp", "wb") as handle:
                pickle.dump(plan, handle, protocol=5)
            os.replace(path + ".tmp", path)
            self._plans[id(plan)] = (plan, path)
            return path

    def _current(self) -> concurrent.futures.ProcessPoolExecutor:
        with self._lock:
            return self._executor

    def _renew(self, broken: concurrent.futures.ProcessPoolExecutor) -> None:
        """Replace a broken executor (once, whichever thread notices first)."""
        with self._lock:
            if self._executor is not broken:
                return
            self._executor = self._new_executor()
        broken.shutdown(wait=False, cancel_futures=True)

    def call(self, function: Any, *args: Any, tries: int = 2) -> Any:
        """``function(*args)`` in a worker (both picklable); this thread waits. When the
        worker dies, the call is made again in a fresh pool, ``tries`` times in all.

        Raises
        ------
        concurrent.futures.process.BrokenProcessPool
            When the worker died every time.
        """
        deaths = 0
        while True:
            executor = self._current()
            try:
                return executor.submit(function, *args).result()
            except BrokenProcessPool:
                deaths += 1
                self._renew(executor)
                if deaths >= tries:
                    raise
            except (RuntimeError, concurrent.futures.CancelledError):
                # another thread renewed the pool between reading it and submitting (the old
                # one is shut down: "cannot schedule new futures", or the call was cancelled):
                # the call goes to the new pool; any other error is the call's own
                if self._current() is executor:
                    raise

    def start_head_start(self, plan: Any, store_root: str, folders: list[str]) -> None:
        """Give each worker one of ``folders`` to begin with (:mod:`pipelines.flows.head_start`)."""
        from pipelines.flows.head_start import HeadStart

        head = HeadStart(store_root)
        plan_path = self._plan_file(plan)
        with self._lock:
            executor = self._executor
        for folder in folders[:self.size]:
            head.futures[folder] = executor.submit(_head_start, plan_path, store_root, head.side_root, folder)
        self._head = head

    def _claimed(self, name: str, plan: Any, entries: dict, store: Any) -> dict | None:
        """The head start's entry for this stage, when it computed it."""
        from pipelines.flows.head_start import HEAD_START_STAGES

        head = self._head
        if head is None or name not in HEAD_START_STAGES or entries.get("folder") not in head.futures:
            return None
        from pipelines.flows.stage_table import STAGES, stage_key

        stage = STAGES[name]
        key = stage_key(stage, plan, {inp: entries[inp] for inp in stage.inputs})
        try:
            return head.claim(name, entries["folder"], key, store)
        except (OSError, ValueError, KeyError):  # a damaged head start: the stage is computed
            return None

    def run_stage(self, name: str, plan: Any, entries: dict, store: Any, recompute: bool,
                  tries: int = 2) -> dict:
        """Run stage ``name`` in a worker and wait for it (or adopt its head start's entry);
        its outcome (see :func:`_run_stage`). A stage whose worker dies is tried again in a
        fresh pool (``tries`` in all); when that worker dies too, the stage has failed."""
        claimed = None if recompute else self._claimed(name, plan, entries, store)
        if claimed is not None:
            return claimed
        try:
            return self.call(_run_stage, name, self._plan_file(plan), entries, str(store.root), recompute,
                             tries=tries)
        except BrokenProcessPool:
            return {"failed": (f"the worker process running {name} died, twice (killed by the system, or out "
                               f"of memory?); set {PROCESSES_ENV}=0 to run the science in the run's own process")}

    def run_chain(self, plan: Any, stages: tuple[str, ...], entries: dict, store: Any,
                  recompute: bool) -> list[tuple[str, dict]]:
        """A core's chain of stages (:mod:`pipelines.flows.chain`) in one worker call, its
        head-started stages adopted first. When the worker dies, the rest of the chain goes
        stage by stage (the finished stages are found in the work store), so that a stage
        that kills its worker a second time fails alone, named."""
        from pipelines.flows.chain import run_chain
        from pipelines.flows.head_start import HEAD_START_STAGES
        from pipelines.flows.stage_table import SCIENCE_STAGES

        entries = dict(entries)
        for name in (s for s in HEAD_START_STAGES if s in SCIENCE_STAGES and s in stages):
            claimed = None if recompute else self._claimed(name, plan, entries, store)
            if claimed is None:
                break
            entries[name] = claimed
        try:
            return self.call(_run_chain, self._plan_file(plan), stages, entries, str(store.root), recompute,
                             tries=1)
        except BrokenProcessPool:
            return run_chain(stages, entries, lambda name, given: self.run_stage(name, plan, given, store,
                                                                                 recompute, tries=1))

    def close(self) -> None:
        """End the workers at once (idle after a run; abandoned, when it was interrupted,
        like a killed run's) and remove the plan files."""
        with self._lock:
            executor = self._executor
        processes = list((getattr(executor, "_processes", None) or {}).values())
        executor.shutdown(wait=False, cancel_futures=True)
        for process in processes:
            with contextlib.suppress(Exception):
                process.terminate()
        shutil.rmtree(self._folder, ignore_errors=True)
        if self._head is not None:
            self._head.remove()


_ACTIVE: SciencePool | None = None


def active_pool() -> SciencePool | None:
    """The pool of the run in progress in this process (``None``: run stages in the thread)."""
    return _ACTIVE


@contextlib.contextmanager
def science_pool_for_run(plan: Any, store_root: str, threads: int, use: bool = True,
                         recompute: bool = False) -> Iterator[SciencePool | None]:
    """The pool the tasks of one run use (see :func:`pool_size`), or ``None``; its workers
    begin with the head start of the first cores (not with ``recompute``) and are ended when
    the run's flow has returned.

    Parameters
    ----------
    plan : RunPlan
        The run's plan.
    store_root : str
        Its work store.
    threads : int
        The run's task threads.
    use : bool
        False for runners that are not this process's threads (Dask): then no pool.
    """
    global _ACTIVE
    units = len(plan.core_folders) + len(plan.auxiliary.get("series", {}))
    size = pool_size(threads, units) if use else 0
    if size == 0:
        yield None
        return
    pool = _ACTIVE = SciencePool(size)
    if not recompute:
        pool.start_head_start(plan, str(store_root), list(plan.core_folders))
    try:
        yield pool
    finally:
        _ACTIVE = None
        pool.close()
