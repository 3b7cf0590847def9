"""The stage table: every stage of a run declared once.

Each :class:`Stage` names its runner (:mod:`pipelines.flows.stages`), the entries it takes
(the results of earlier stages, or a core folder / training-set name), the run-folder tables it
writes (keys of :mod:`pipelines.outputs_schema`) and the parts of its cache key. The archive
flow, the per-core flow, the Prefect task wrappers (:mod:`pipelines.flows.tasks`), the chained
Dask task and the manifest's random streams are all built from :data:`STAGES`; adding a stage
is one declaration here plus its runner (see DEVELOPERS.md, "A new stage").

A stage's cache key is the SHA-256 of its name, the science code's fingerprint, the keys of
the entries it takes and its declared key parts (:data:`KEY_PARTS`), so a change anywhere
upstream recomputes it and everything after it.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable

from pipelines.flows import stages
from pipelines.flows.dated_samples import run_dated_samples
from pipelines.flows.keys import content_key
from pipelines.flows.series import run_series
from pipelines.flows.plan import RunPlan
from pipelines.flows.store import WorkStore

__all__ = ["Stage", "STAGES", "CORE_STAGES", "SCIENCE_STAGES", "PUBLISH_STAGES", "KEY_PARTS", "COLLECTIONS",
           "NOT_RUN", "finished", "take_inputs", "stage_key", "call_stage", "probe_stage"]


def _instrumental_digests(plan: RunPlan, entries: dict) -> dict[str, str]:
    return {name: digest for name, (_, digest) in sorted(plan.auxiliary["instrumental"].items())}


def _training_file(plan: RunPlan, entries: dict) -> tuple[str, Any]:
    name = entries["name"]
    return plan.auxiliary["training"][name][1], plan.config.sections["training"].get(name)


def _series_file(plan: RunPlan, entries: dict) -> tuple:
    name = entries["name"]
    spec = plan.config.sections["series"][name]
    ensemble = spec.get("ensemble_file")
    return (plan.auxiliary["series"][name][1], plan.file_digest(plan.config.resolve(ensemble)) if ensemble else None,
            spec, plan.settings_key("reconstruction"))


#: key part name -> what it hashes (a function of the plan and the stage's entries)
KEY_PARTS: dict[str, Callable[[RunPlan, dict], Any]] = {
    "core files": lambda plan, entries: plan.folder_digest(entries["folder"]),
    "training file and spec": _training_file,
    "series files and spec": _series_file,
    "curves": lambda plan, entries: plan.curve_hashes,
    "instrumental files": _instrumental_digests,
    "seed": lambda plan, entries: plan.run_seed,
    "ensemble": lambda plan, entries: plan.ensemble,
    **{f"[{section}] settings": (lambda plan, entries, s=section: plan.settings_key(s))
       for section in ("chronology", "calibration", "reconstruction", "events")},
}


@dataclass(frozen=True)
class Stage:
    """One stage (see the module docstring).

    Attributes
    ----------
    name : str
        Stage name (also the Prefect task name and the random stream's stage name).
    runner : callable
        ``runner(plan, store, key, recompute, **entries)`` -> work-store entry.
    inputs : tuple of str
        Entries the runner takes, by name: earlier stages, ``training`` (all training-set
        entries), ``reconstructions`` / ``all_events`` (every core's), ``folder`` or ``name``.
    tables : tuple of str
        Run-folder tables it writes (:mod:`pipelines.outputs_schema` keys).
    key_parts : tuple of str
        Keys of :data:`KEY_PARTS` hashed into its cache key.
    per_core : bool
        Run once per core (else once per run).
    at_publish : bool
        A per-core stage that runs last, for every core whose required inputs finished,
        whatever stage it reached (not in :data:`CORE_STAGES`).
    optional : tuple of str
        Inputs given as ``None`` when their stage did not finish (skipped or failed); a
        stage whose other inputs did not all finish is not run (:func:`take_inputs`).
    """

    name: str
    runner: Callable[..., dict]
    inputs: tuple[str, ...]
    tables: tuple[str, ...]
    key_parts: tuple[str, ...]
    per_core: bool = True
    at_publish: bool = False
    optional: tuple[str, ...] = ()


#: every stage, in the order a core goes through them (run-level stages where they run)
STAGES: dict[str, Stage] = {s.name: s for s in (
    Stage("training", stages.run_training, ("name",), ("training_cv", "training_skill"),
          ("training file and spec", "seed"), per_core=False),
    Stage("series", run_series, ("name",), ("reconstruction", "reconstruction_ensemble"),
          ("series files and spec", "seed", "ensemble"), per_core=False),
    Stage("ingest", stages.run_ingest, ("folder",), (), ("core files",)),
    Stage("chronology", stages.run_chronology, ("ingest",),
          ("chronology", "age_ensemble", "dates", "date_ranges", "date_densities"),
          ("curves", "[chronology] settings", "seed", "ensemble")),
    Stage("calibration", stages.run_calibration, ("ingest", "chronology", "training"),
          ("calibration", "calibrated_samples", "calibration_diagnostics"),
          ("[calibration] settings", "instrumental files", "seed", "ensemble")),
    Stage("reconstruction", stages.run_reconstruction, ("ingest", "chronology", "calibration"),
          ("reconstruction", "reconstruction_ensemble"), ("[reconstruction] settings", "seed")),
    Stage("events", stages.run_events, ("reconstruction",), ("events", "event_probability", "event_onsets"),
          ("[events] settings", "seed")),
    Stage("samples", run_dated_samples, ("ingest", "chronology", "calibration"), ("samples_dated",), (),
          at_publish=True, optional=("calibration",)),
    Stage("stack", stages.run_stack, ("reconstructions",),
          ("stack", "stack_ensemble", "regional_events", "regional_onsets"),
          ("[reconstruction] settings", "[events] settings", "seed"), per_core=False),
    Stage("archive_events", stages.run_archive_events, ("all_events",), ("archive_events", "lead_lag"),
          ("[events] settings",), per_core=False),
)}

#: the stages of one core, in order
CORE_STAGES: tuple[str, ...] = tuple(name for name, s in STAGES.items() if s.per_core and not s.at_publish)
#: per-core stages run just before a core's folder is published
PUBLISH_STAGES: tuple[str, ...] = tuple(name for name, s in STAGES.items() if s.at_publish)
#: a core's stages after ingest (chained into one task on Dask)
SCIENCE_STAGES: tuple[str, ...] = CORE_STAGES[1:]


#: inputs that hold many entries (name -> entry): only the finished ones are given
COLLECTIONS: frozenset[str] = frozenset({"training", "reconstructions", "all_events"})
#: inputs that are plain values, not entries
_PLAIN_INPUTS: frozenset[str] = frozenset({"folder", "name"})
#: what a stage returns when an input it needs did not finish (nothing was run)
NOT_RUN: dict[str, Any] = {"not_run": True}


def finished(entry: Any) -> bool:
    """Whether ``entry`` is a finished work-store entry (not a skip, a failure or
    :data:`NOT_RUN`)."""
    return isinstance(entry, dict) and "key" in entry


def take_inputs(stage: Stage, entries: dict[str, Any]) -> dict[str, Any] | None:
    """The inputs ``stage`` is run on, taken by name from ``entries``; ``None`` when an input
    it needs did not finish (it was skipped or failed: the stage must not run).

    An :attr:`Stage.optional` input that did not finish is given as ``None``; a collection
    (:data:`COLLECTIONS`, e.g. every training set) keeps only its finished entries.
    """
    taken: dict[str, Any] = {}
    for name in stage.inputs:
        value = entries.get(name)
        if name in _PLAIN_INPUTS:
            taken[name] = value
        elif name in COLLECTIONS:
            taken[name] = {member: entry for member, entry in sorted(value.items()) if finished(entry)}
        elif finished(value):
            taken[name] = value
        elif name in stage.optional:
            taken[name] = None
        else:
            return None
    return taken


def _entry_key(value: Any) -> Any:
    """What an input contributes to a key: an entry's key, a dict of entries' keys, or the
    value itself (a folder or a training-set name)."""
    if isinstance(value, dict) and "key" in value:
        return value["key"]
    if isinstance(value, dict):
        return {name: _entry_key(entry) for name, entry in sorted(value.items())}
    return value


def stage_key(stage: Stage, plan: RunPlan, entries: dict[str, Any]) -> str:
    """The cache key of ``stage`` given its entries (see the module docstring)."""
    return content_key(stage.name, plan.fingerprint, [_entry_key(entries[name]) for name in stage.inputs],
                       [KEY_PARTS[part](plan, entries) for part in stage.key_parts])


def call_stage(name: str, plan: RunPlan, entries: dict[str, Any], store: WorkStore,
               recompute: bool = False) -> dict:
    """Run stage ``name`` on its entries (:func:`take_inputs`); :data:`NOT_RUN` (and nothing
    run) when an input it needs did not finish."""
    stage = STAGES[name]
    taken = take_inputs(stage, entries)
    if taken is None:
        return dict(NOT_RUN)
    return stage.runner(plan, store, stage_key(stage, plan, taken), recompute, **taken)


def probe_stage(name: str, plan: RunPlan, entries: dict[str, Any], store: WorkStore) -> dict | None:
    """The finished entry of stage ``name`` without computing anything (see
    :func:`pipelines.flows.stages.probe`)."""
    return stages.probe(lambda: call_stage(name, plan, entries, store, False))
