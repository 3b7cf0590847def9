"""A head start for the first cores: their ingest and chronology begin while Prefect starts.

The temporary Prefect server takes ~3.5 s to start (longer under load) and the flow's first
task runs only after it. Meanwhile the science workers (:mod:`pipelines.flows.science_pool`)
would sit idle, so each begins at once with one of the run's first cores: ingest, then
chronology (the largest stage), each written as a finished entry into a private *side store*
(a hidden folder inside the work store). Nothing there is visible to the run: the flow's own
tasks still run every stage, and when the ``ingest`` or ``chronology`` task of such a core
asks the pool for its work, :meth:`HeadStart.claim` waits for the head start of that core to
reach that stage and adopts its entry into the work store (hard links, one rename) instead of
computing it again. The entry is the one the task would have computed (same stage, same cache
key, same code), so the bytes are the same; its seconds are the time it took in the worker, and
it counts as computed, not reused. A head start that fails or has not produced the entry is
simply ignored: the task then computes the stage itself (and reports any failure).
"""

from __future__ import annotations

import json
import os
import pathlib
import shutil
import time
from typing import Any

__all__ = ["HEAD_START_STAGES", "HeadStart", "run_head_start"]

#: the stages a head start computes, in order
HEAD_START_STAGES = ("ingest", "chronology")

#: seconds between two looks for a stage the head start is still computing
CLAIM_POLL_SECONDS = 0.02


def _result_file(side_root: str, stage: str, key: str) -> pathlib.Path:
    return pathlib.Path(side_root) / "results" / f"{stage}-{key}.json"


def run_head_start(plan: Any, store_root: str, side_root: str, folder: str) -> None:
    """In a worker: :data:`HEAD_START_STAGES` of the core in ``folder`` into the side store.

    A stage already finished in the work store is taken from it (the flow will find it there
    too); after each computed stage its result (the runner's small description) is written
    as ``results/<stage>-<key>.json``, the sign for :meth:`HeadStart.claim`. Returns at the
    first failure: the flow's task computes that stage itself and reports it.
    """
    from pipelines.flows.stage_table import STAGES, call_stage, stage_key
    from pipelines.flows.store import WorkStore
    from pipelines.runfolder import atomic_write_json

    store, side = WorkStore(store_root), WorkStore(side_root)
    entries: dict[str, Any] = {"folder": folder}
    for stage in HEAD_START_STAGES:
        key = stage_key(STAGES[stage], plan, {name: entries[name] for name in STAGES[stage].inputs})
        found = store.lookup(stage, key)
        if found is None:
            try:
                found = call_stage(stage, plan, entries, side, False)
            except Exception:  # noqa: BLE001 - the flow's task computes it and reports the failure
                return
            atomic_write_json(_result_file(side_root, stage, key), found)
        entries[stage] = found


class HeadStart:
    """The head starts of one run (see the module docstring).

    Parameters
    ----------
    store_root : str
        The run's work store; the side store is a hidden folder inside it (same file system,
        so that adopting an entry is hard links and a rename).
    """

    def __init__(self, store_root: str):
        self.store_root = store_root
        self.side_root = os.path.join(store_root, f".head-start-{os.getpid()}-{time.monotonic_ns()}")
        self.futures: dict[str, Any] = {}  # core folder -> future of its head start

    def claim(self, stage: str, folder: str | None, key: str, store: Any) -> dict | None:
        """The entry the head start of ``folder`` computed for ``stage`` (adopted into
        ``store``), waiting while it is being computed; ``None`` when there is none."""
        future = self.futures.get(folder or "")
        if stage not in HEAD_START_STAGES or future is None:
            return None
        result = _result_file(self.side_root, stage, key)
        while not result.is_file():
            if future.done():
                if result.is_file():
                    break
                return None
            time.sleep(CLAIM_POLL_SECONDS)
        described = json.loads(result.read_text(encoding="utf-8"))
        adopted = _adopt(pathlib.Path(described["dir"]), store, stage, key)
        if adopted is None:
            return None
        return {**described, "dir": adopted["dir"], "paths": adopted["paths"]}

    def remove(self) -> None:
        shutil.rmtree(self.side_root, ignore_errors=True)


def _adopt(side_dir: pathlib.Path, store: Any, stage: str, key: str) -> dict | None:
    """Hard-link a finished side-store entry into the work store (an entry published there
    meanwhile wins); returns the work store's description of it."""
    from pipelines.flows.store import ENTRY_FILE
    from pipelines.runfolder import link_or_copy, publish_folder, staging_folder

    target = store.entry_dir(stage, key)
    if not (target / ENTRY_FILE).is_file():
        with staging_folder(target.parent, key) as staged:
            for file in sorted(side_dir.iterdir()):
                link_or_copy(file, staged / file.name)
            publish_folder(staged, target)
    return store.lookup(stage, key)
