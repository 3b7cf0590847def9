"""Inputs shared by the stages of a process (pipelines/flows/shared.py).

A Core, a fitted transfer function and an instrumental series are read once per process and
the same object is given to every stage that takes it, so no stage may modify one. The first
test runs every stage of the demo's four cores (sections, event layers, counts with a WA-PLS
transfer function, instrumental overlap, published equations) on the shared objects and then
compares each with a fresh copy read from its file: any change to a table's values, dtypes,
columns or index, to an array or to an attribute would show.
"""

from __future__ import annotations

import dataclasses
import pathlib

import numpy as np
import pandas as pd
import pytest

from pipelines.flows import shared
from pipelines.flows.plan import build_plan
from pipelines.flows.stage_table import CORE_STAGES, PUBLISH_STAGES, call_stage
from pipelines.flows.store import WorkStore, load_object

DEMO_CONFIG = pathlib.Path(__file__).resolve().parents[1] / "demo_cores" / "run.toml"


def state(value):
    """A comparable picture of ``value``: tables by content (values, dtypes, columns, index),
    arrays by bytes, dataclasses and plain objects attribute by attribute."""
    if isinstance(value, pd.DataFrame):
        return ("frame", tuple(map(str, value.columns)), tuple(map(str, value.dtypes)),
                tuple(map(str, value.index.names)), pd.util.hash_pandas_object(value, index=True).to_numpy().tobytes(),
                state(dict(value.attrs)))
    if isinstance(value, pd.Series):
        return state(value.to_frame())
    if isinstance(value, np.ndarray):
        return ("array", str(value.dtype), value.shape, np.ascontiguousarray(value).tobytes())
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return (type(value).__name__, tuple((f.name, state(getattr(value, f.name))) for f in dataclasses.fields(value)))
    if isinstance(value, dict):
        return ("dict", tuple((str(k), state(v)) for k, v in sorted(value.items(), key=lambda kv: str(kv[0]))))
    if isinstance(value, (list, tuple)):
        return (type(value).__name__, tuple(state(v) for v in value))
    if hasattr(value, "__dict__") and not isinstance(value, type):
        return (type(value).__name__, state(vars(value)))
    return repr(value)


@pytest.mark.slow
def test_no_stage_modifies_the_shared_core_transfers_or_instrumental(tmp_path):
    plan = build_plan(DEMO_CONFIG)
    store = WorkStore(str(tmp_path / "cache"))
    shared.SHARED.clear()
    training = {name: call_stage("training", plan, {"name": name}, store) for name in sorted(plan.auxiliary["training"])}
    assert training and plan.auxiliary["instrumental"], "the demo has a training set and an instrumental series"
    ingests = []
    for folder in plan.core_folders:
        entries = {"folder": folder, "training": training}
        for stage in CORE_STAGES:
            entries[stage] = call_stage(stage, plan, entries, store)
        for stage in PUBLISH_STAGES:
            entries[stage] = call_stage(stage, plan, entries, store)
        assert entries["reconstruction"].get("n_series"), f"{folder}: the demo core reaches its reconstruction"
        ingests.append(entries["ingest"])

    for entry in [*ingests, *training.values()]:
        used = shared.shared_result(entry)  # the object every stage was given
        assert shared.shared_result(entry) is used, "read once, then shared"
        assert state(used) == state(load_object(entry)), f"a stage modified the shared {type(used).__name__}"
    from pipelines.auxiliary import read_instrumental

    for name in plan.auxiliary["instrumental"]:
        assert state(shared.shared_instrumental(plan, name)) == state(read_instrumental(plan.config, name))
    # each core read once (by chronology; calibration, reconstruction and samples reuse it),
    # each training set once (by the first calibration), each instrumental series once
    assert shared.SHARED.reads == len(ingests) + len(training) + len(plan.auxiliary["instrumental"])


def test_state_sees_a_changed_cell_and_a_changed_dtype():
    frame = pd.DataFrame({"depth_cm": [1.0, 2.0], "uk37": [0.5, 0.6]})
    before = state(frame)
    changed = frame.copy()
    changed.loc[1, "uk37"] = 0.7
    assert state(changed) != before
    assert state(frame.astype({"uk37": "float32"})) != before
    assert state(frame.copy()) == before


def test_cache_reads_once_and_keeps_to_its_byte_bound():
    cache = shared.SharedObjects(max_bytes=100)
    reads = []

    def reader(name):
        return lambda: reads.append(name) or name.upper()

    assert cache.get("a", 40, reader("a")) == "A"
    assert cache.get("a", 40, reader("a")) == "A"
    assert reads == ["a"]
    cache.get("b", 40, reader("b"))
    cache.get("a", 40, reader("a"))  # a is now the most recently used
    cache.get("c", 40, reader("c"))  # 120 bytes > 100: the least recently used (b) goes
    assert cache.held_bytes == 80 and len(cache) == 2
    cache.get("b", 40, reader("b"))
    assert reads == ["a", "b", "c", "b"]
    cache.get("huge", 500, reader("huge"))  # larger than the bound: returned, not kept
    assert len(cache) == 2 and cache.held_bytes <= 100
