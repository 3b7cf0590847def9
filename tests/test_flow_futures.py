"""The archive flow on plain Prefect futures: a stage whose input did not finish never runs,
a failure at a later stage stops only its core (and names the stage), a duplicate core id
fails the second core before its science, and cores are published as they finish, not all
at the end.

The cores come from tests/archive_factory.py (synthetic cores, an invented curve).
"""

from __future__ import annotations

import dataclasses
import shutil

import pytest

from archive_factory import FULL_CHAIN, write_archive
from pipelines.flows import stage_table
from pipelines.flows.run import execute_run
from pipelines.flows.runners import ExecutorChoice
from pipelines.flows.stage_table import NOT_RUN, STAGES, call_stage, take_inputs

ENTRY = {"key": "k" * 64, "core_id": "C-1", "paths": {}}


def _run(config, out, cache, **kwargs):
    return execute_run(config, out, cache_dir=cache, report=False, choice=ExecutorChoice(workers=2), **kwargs)


def test_a_stage_whose_input_was_skipped_or_failed_is_not_run():
    """The skipped or failed entry never reaches the runner (it would read a missing key):
    the stage returns NOT_RUN before its cache key is even built (no plan is needed)."""
    for stopped in ({"skipped": "reconstruction skipped: no calibrated record", "seconds": 0.1},
                    RuntimeError("calibration: bad value"), dict(NOT_RUN)):
        assert call_stage("events", None, {"reconstruction": stopped}, None) == NOT_RUN  # type: ignore[arg-type]
    assert take_inputs(STAGES["reconstruction"], {"ingest": ENTRY, "chronology": {"skipped": "x"},
                                                  "calibration": ENTRY}) is None


def test_optional_inputs_and_collections_keep_only_finished_entries():
    """The per-sample table runs without a calibration that was skipped (given None); a
    failed training set is left out of the calibration's training sets."""
    samples = take_inputs(STAGES["samples"], {"ingest": ENTRY, "chronology": ENTRY, "calibration": {"skipped": "x"}})
    assert samples == {"ingest": ENTRY, "chronology": ENTRY, "calibration": None}
    calibration = take_inputs(STAGES["calibration"], {
        "ingest": ENTRY, "chronology": ENTRY, "training": {"b": ENTRY, "a": RuntimeError("fit failed")}})
    assert calibration["training"] == {"b": ENTRY}


@pytest.mark.usefixtures("prefect_harness")
def test_a_failure_at_a_later_stage_stops_only_that_core(tmp_path, monkeypatch):
    config = write_archive(tmp_path, n_cores=3, ensemble=20, n_dates=4, n_samples=10, extra_config=FULL_CHAIN)
    real = STAGES["reconstruction"].runner

    def fails_for_one_core(plan, store, key, recompute, **entries):
        if entries["ingest"]["core_id"] == "SYN-001":
            raise ValueError("an invented failure of the reconstruction")
        return real(plan, store, key, recompute, **entries)

    monkeypatch.setitem(stage_table.STAGES, "reconstruction",
                        dataclasses.replace(STAGES["reconstruction"], runner=fails_for_one_core))
    outcome = _run(config, tmp_path / "run", tmp_path / "cache")
    rows = outcome.summary.set_index("core_id")
    assert list(rows["status"]) == ["ok", "failed", "ok"]
    bad = rows.loc["SYN-001"]
    assert bad["error"] == "reconstruction: ValueError: an invented failure of the reconstruction"
    assert bad["stage_reached"] == "calibration"
    files = {p.name for p in (outcome.run_dir / "SYN-001").iterdir()}
    assert "calibration.parquet" in files and "samples_dated.parquet" in files  # what it reached, published
    assert "events.parquet" not in files and "reconstruction.parquet" not in files
    assert set(outcome.timings.loc[outcome.timings["core_id"] == "SYN-001", "stage"]) == {
        "ingest", "chronology", "calibration", "samples"}
    assert (outcome.run_dir / "SYN-002" / "events.parquet").is_file()


@pytest.mark.usefixtures("prefect_harness")
def test_a_second_core_with_the_same_id_fails_before_its_science(tmp_path):
    config = write_archive(tmp_path, n_cores=2, ensemble=20, n_dates=4, n_samples=10)
    shutil.copytree(tmp_path / "cores" / "SYN-000", tmp_path / "cores" / "SYN-000-copy")
    outcome = _run(config, tmp_path / "run", tmp_path / "cache")
    rows = outcome.summary.set_index("folder")
    copy = rows.loc[str(tmp_path / "cores" / "SYN-000-copy")]
    assert copy["status"] == "failed" and "also used by" in copy["error"] and copy["stage_reached"] == "none"
    assert copy["core_id"] == "SYN-000-copy"  # named by its folder: the id belongs to the first core
    assert [p.name for p in (outcome.run_dir / "SYN-000-copy").iterdir()] == ["log.txt"]
    assert list(outcome.summary["status"]) == ["dated", "failed", "dated"]


@pytest.mark.usefixtures("prefect_harness")
def test_cores_are_published_as_they_finish(tmp_path):
    """The first core's folder is published while later cores' stages are still to run
    (one chained task per core, in core order), not after every core's last stage."""
    config = write_archive(tmp_path, n_cores=10, ensemble=20, n_dates=4, n_samples=10)
    cache = tmp_path / "cache"
    seen: list[tuple[str, int]] = []

    class Observer:
        def started(self, total): ...
        def stage(self, label, stage): ...
        def phase(self, text): ...
        def close(self): ...
        def finished(self, track):
            seen.append((track.name, len(list((cache / "samples").glob("*/*")))))

    _run(config, tmp_path / "run", cache, progress=Observer())
    assert sorted(name for name, _ in seen) == [f"SYN-{i:03d}" for i in range(10)]
    first_name, samples_done = seen[0]
    assert first_name in ("SYN-000", "SYN-001") and samples_done < 10, seen  # all at the end: SYN-00x, 10
