"""What happened to one core in a run: its finished stages, notes, warnings and status.

The archive flow (:mod:`pipelines.flows.archive`) gets each stage's outcome from the task
runner (a finished entry, ``{"skipped": reason}``, the exception it failed with, or
:data:`pipelines.flows.stage_table.NOT_RUN` after an upstream stop) and records them here in
stage order: the first stage that did not finish is where the core stopped ("failed at
<stage>: message", or a note for a skipped stage), and nothing after it counts. The
:data:`PUBLISH_STAGES` (the per-sample table) are recorded last, for every core that had their
inputs. The summary row, the timings and the core's ``log.txt`` come from the track.
"""

from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass, field
from typing import Any, Callable

from pipelines.flows.stage_table import PUBLISH_STAGES, SCIENCE_STAGES, STAGES, finished
from pipelines.flows.status import finished_status

__all__ = ["CoreTrack", "record_stage", "record_first", "record_rest", "log_text", "published_entries"]


@dataclass
class CoreTrack:
    """Where one core is in the run, and what happened to it."""

    folder: str
    label: str
    core_id: str | None = None
    entries: dict[str, dict] = field(default_factory=dict)
    reached: str = ""
    status: str = "running"
    error: str = ""
    warnings: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    seconds: dict[str, float] = field(default_factory=dict)
    cached: dict[str, bool] = field(default_factory=dict)
    log: list[str] = field(default_factory=list)
    is_series: bool = False

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

    def stages_left(self) -> tuple[str, ...]:
        """The per-core stages still to run, in order: those after the finished ones whose
        per-core inputs are finished or run before them (a dated series, whose
        reconstruction is its own, goes on with its events only)."""
        have, left = set(self.entries), []
        for stage in (*SCIENCE_STAGES, *PUBLISH_STAGES):
            needs = [name for name in STAGES[stage].inputs if name in STAGES and STAGES[name].per_core]
            if stage not in have and all(name in have or name in left for name in needs):
                left.append(stage)
        return tuple(left)


def record_stage(track: CoreTrack, stage: str, result: Any) -> bool:
    """Record one finished stage of a core; False when the core stops here (it failed: the
    error names the stage, or it was skipped: the reason becomes a note)."""
    if not isinstance(result, (dict, BaseException)) or (isinstance(result, dict) and not finished(result)
                                                           and "skipped" not in result):
        result = RuntimeError(f"the stage did not run ({result!r})")  # never expected: a stop upstream
    if isinstance(result, BaseException):
        track.status, track.error = "failed", f"{stage}: {result}"
        track.say(f"{stage} FAILED: {result}")
        return False
    track.seconds[stage] = float(result.get("seconds", 0.0))
    if "skipped" in result:
        track.notes.append(result["skipped"])
        track.say(result["skipped"])
        return False
    _keep(track, stage, result)
    return True


def _keep(track: CoreTrack, stage: str, result: dict) -> None:
    track.entries[stage] = result
    track.reached = stage
    track.cached[stage] = bool(result.get("cached"))
    track.warnings += [f"{stage}: {w}" for w in result.get("warnings", [])]
    track.notes += [f"{stage}: {n}" for n in result.get("notes", [])]
    track.say(f"{stage} done in {result.get('seconds', 0.0):.2f} s"
              + (" (reused from the cache)" if result.get("cached") else ""))


def record_first(track: CoreTrack, result: Any, ids: dict[str, str]) -> bool:
    """Record a core's ingest (or a dated series' ``series`` stage, kept as the core's
    reconstruction) and give the core its id; False when it stops here -- a failure, a
    skip, or an id already used by an earlier core (then it fails: ids name folders)."""
    usable = not isinstance(result, BaseException) and "skipped" not in result
    if track.is_series:
        if usable and not _claim_id(track, track.label, ids):
            return False
        if usable:
            track.seconds["series"] = float(result.get("seconds", 0.0))
        return record_stage(track, "reconstruction", result)
    if not usable:
        return record_stage(track, "ingest", result)
    track.seconds["ingest"] = float(result.get("seconds", 0.0))
    if not _claim_id(track, result["core_id"], ids):
        return False
    _keep(track, "ingest", result)
    return True


def _claim_id(track: CoreTrack, core_id: str, ids: dict[str, str]) -> bool:
    if core_id in ids:
        track.status = "failed"
        track.error = (f"ingest: core id {core_id!r} is also used by {ids[core_id]} -- "
                       "give every core its own id")
        return False
    ids[core_id] = track.folder
    track.core_id = core_id
    return True


def record_rest(track: CoreTrack, results: dict[str, Any], training_note: Callable[[], str]) -> None:
    """Record the stages a core ran after its first (``results``: stage -> outcome), in
    stage order up to the first one that did not finish, then its publish stages, and set
    its status. ``training_note()`` is the note of a core calibrated without a failed
    training set (empty when none failed), asked only for a core that got that far."""
    for stage in SCIENCE_STAGES:
        if stage in track.entries or stage not in results:
            continue  # run before (a series' reconstruction), or not for this core
        if "training" in STAGES[stage].inputs and training_note():
            track.notes.append(training_note())
        if not record_stage(track, stage, results[stage]):
            break
    for stage in PUBLISH_STAGES:
        if stage in results and results[stage] is not None:
            _record_publish_stage(track, stage, results[stage])
    if track.status == "running":
        track.status = finished_status(track.entries)
    track.say(f"finished: {track.status}, stage reached {track.reached or 'none'}")


def _record_publish_stage(track: CoreTrack, stage: str, result: Any) -> None:
    if isinstance(result, BaseException):
        track.status, track.error = "failed", f"{stage}: {result}"
        track.say(f"{stage} FAILED: {result}")
    elif "skipped" in result:
        track.notes.append(result["skipped"])
    elif finished(result):
        track.entries[stage] = result
        track.seconds[stage] = float(result.get("seconds", 0.0))
        track.cached[stage] = bool(result.get("cached"))
        track.warnings += [f"{stage}: {w}" for w in result.get("warnings", [])]


def published_entries(track: CoreTrack) -> list[dict]:
    """The entries whose tables go into the core's folder, in stage order."""
    return [track.entries[s] for s in (*SCIENCE_STAGES, *PUBLISH_STAGES) if s in track.entries]


def log_text(track: CoreTrack) -> str:
    """The core's ``log.txt``."""
    lines = [f"downcore core log: {track.name}", *track.log]
    lines += [f"warning: {w}" for w in track.warnings] + [f"note: {n}" for n in track.notes]
    if track.error:
        lines.append(f"error: {track.error}")
    return "\n".join(lines) + "\n"
