"""A core's stages after its ingest, run one after the other in one call.

The archive flow gives each core one chained task (:func:`pipelines.flows.tasks.core_chain_task`)
instead of one task per stage: every task run costs orchestration CPU in the flow's process
and in the Prefect server (measured ~0.1-0.2 s per task run; the science of a core is ~1.3 s),
and on a small machine that CPU is taken from the science. On threads with a science pool the
whole chain is one call of one worker process (:meth:`pipelines.flows.science_pool.SciencePool.run_chain`);
on Dask a task holds a few cores' chains.

Each stage still goes through its own runner (:func:`pipelines.flows.stage_table.call_stage`):
it is cached under its own content key exactly as when run alone (``--resume`` and the re-run
reuse it stage by stage), writes the same bytes and has its own timing. The chain stops at the
first science stage that is skipped or fails, then runs the publish stages
(:data:`~pipelines.flows.stage_table.PUBLISH_STAGES`) whose inputs finished. This module does
not import Prefect: it runs in the science workers.
"""

from __future__ import annotations

import time
from typing import Any, Callable

from pipelines.flows.plan import RunPlan
from pipelines.flows.stage_table import PUBLISH_STAGES, SCIENCE_STAGES, STAGES, call_stage, finished, take_inputs
from pipelines.flows.store import WorkStore

__all__ = ["run_chain", "stage_outcome", "guarded_call", "run_core_chain"]

#: ``call(stage, entries)`` -> the stage's outcome: its entry, ``{"skipped": reason, "seconds": s}``
#: or ``{"failed": message}``
StageCall = Callable[[str, dict], dict]


def run_chain(stages: tuple[str, ...], entries: dict[str, Any], call: StageCall) -> list[tuple[str, dict]]:
    """Run a core's ``stages`` with ``call``: its science stages in order, up to the first
    one that did not finish, then its publish stages whose inputs finished.

    A science stage already finished in ``entries`` (a head start's chronology adopted by the
    caller) is taken as it is.

    Returns
    -------
    list of (stage, outcome)
        One per stage reached, in stage order.
    """
    entries = dict(entries)
    done: list[tuple[str, dict]] = []
    for stage in (s for s in SCIENCE_STAGES if s in stages):
        result = entries[stage] if finished(entries.get(stage)) else call(stage, entries)
        done.append((stage, result))
        if not finished(result):
            break
        entries[stage] = result
    for stage in (s for s in PUBLISH_STAGES if s in stages):
        if take_inputs(STAGES[stage], entries) is not None:
            done.append((stage, call(stage, entries)))
    return done


def stage_outcome(stage: str, plan: RunPlan, entries: dict, store: WorkStore, recompute: bool) -> dict:
    """Stage ``stage`` run in this process: its entry, ``{"skipped": reason, "seconds": s}``
    or ``{"failed": message}``, a failure isolated to the core and described in plain text
    (picklable, so it crosses processes intact). The one place where a stage's exception
    becomes an outcome: the chain, the Prefect stage tasks and the science workers all call it."""
    from pipelines.flows.stages import StageSkipped, pin_blas_threads, problem_text

    pin_blas_threads()
    start = time.perf_counter()
    try:
        return call_stage(stage, plan, entries, store, recompute)
    except StageSkipped as skipped:
        return {"skipped": str(skipped), "seconds": round(time.perf_counter() - start, 4)}
    except Exception as error:  # noqa: BLE001 - any failure is isolated to its core
        return {"failed": problem_text(error)}


def guarded_call(plan: RunPlan, store: WorkStore, recompute: bool) -> StageCall:
    """A :data:`StageCall` running the stage in this process (:func:`stage_outcome`)."""

    def call(stage: str, entries: dict) -> dict:
        return stage_outcome(stage, plan, entries, store, recompute)

    return call


def run_core_chain(plan: RunPlan, stages: tuple[str, ...], entries: dict, store: WorkStore,
                   recompute: bool = False) -> list[tuple[str, dict]]:
    """:func:`run_chain` of one core in this process (see the module docstring)."""
    return run_chain(stages, entries, guarded_call(plan, store, recompute))
