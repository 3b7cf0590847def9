"""The archive flow under Prefect's test harness: isolation of failing cores, the summary,
byte-identical re-runs, caching by content hash, and the per-core flow.

The cores come from tests/archive_factory.py (synthetic cores with a known truth and an
invented curve built in code).
"""

from __future__ import annotations

import pathlib

import pandas as pd
import pytest

from archive_factory import FULL_CHAIN, broken_ids, write_archive, write_curve
from pipelines.flows.run import execute_run
from pipelines.flows.runners import ExecutorChoice
from pipelines.manifest import read_manifest
from pipelines.runfolder import RunFolderError, read_parquet

pytestmark = pytest.mark.usefixtures("prefect_harness")

CORE_FILES = {"chronology.parquet", "age_ensemble.parquet", "dates.parquet", "date_ranges.parquet",
              "date_densities.parquet", "hyperparameters.parquet", "calibration.parquet",
              "calibrated_samples.parquet", "calibration_diagnostics.parquet",
              "reconstruction.parquet", "reconstruction_ensemble.parquet", "events.parquet",
              "event_probability.parquet", "event_onsets.parquet", "samples_dated.parquet",
              "samples_dated.csv", "log.txt"}


def _parquet_bytes(run: pathlib.Path) -> dict[str, bytes]:
    return {p.relative_to(run).as_posix(): p.read_bytes() for p in sorted(run.rglob("*.parquet"))}


def _run(config, out, cache, **kwargs):
    return execute_run(config, out, cache_dir=cache, report=False,
                       choice=ExecutorChoice(workers=2), **kwargs)


@pytest.fixture(scope="module")
def small_archive(tmp_path_factory):
    root = tmp_path_factory.mktemp("archive")
    config = write_archive(root, n_cores=4, broken=1, ensemble=40, n_dates=4, n_samples=15,
                           extra_config=FULL_CHAIN)
    return root, config


@pytest.fixture(scope="module")
def first_run(small_archive):
    root, config = small_archive
    return _run(config, root / "runs" / "first", root / "cache")


def test_every_table_the_pipeline_writes_fits_the_schema(first_run):
    """A real run (chronology to events, training set, stack, a failed core): every Parquet
    file is declared in pipelines/outputs_schema.py, with no undeclared column, every
    required column and the declared dtypes; so is timings.csv."""
    from pipelines.outputs_schema import TABLES, file_problems, run_folder_problems

    run = first_run.run_dir
    assert run_folder_problems(run) == []
    assert file_problems(run / "timings.csv", TABLES["timings"]) == []
    written = {p.relative_to(run).as_posix() for p in run.rglob("*.parquet")}
    assert "SYN-000/date_ranges.parquet" in written and "stack.parquet" in written


def test_per_sample_csv_is_written_without_the_report(first_run):
    """With report=False (``--no-report``) every dated core still has ``samples_dated.csv``,
    the text the exports write for a table (pipelines/report/csv.py) of its Parquet file."""
    from pipelines.report.csv import table_csv_text

    dated = [p.parent for p in first_run.run_dir.glob("*/samples_dated.parquet")]
    assert len(dated) == 3
    for core in dated:
        text = table_csv_text(read_parquet(core / "samples_dated.parquet"))
        assert (core / "samples_dated.csv").read_text(encoding="utf-8") == text
    assert not list(first_run.run_dir.glob("*/chronology.csv"))  # the other copies stay exports


def test_failing_core_is_isolated_and_reported(first_run):
    summary = read_parquet(first_run.run_dir / "summary.parquet")
    assert list(summary["core_id"]) == ["SYN-000", "SYN-001", "SYN-002", "SYN-003"]
    assert first_run.failed == broken_ids(4, 1) == ["SYN-003"]
    bad = summary.set_index("core_id").loc["SYN-003"]
    assert bad["stage_reached"] == "none" and "depth_cm" in bad["error"] and "samples.csv" in bad["error"]
    good = summary[summary["status"] == "ok"]
    assert set(good["stage_reached"]) == {"events"}
    for core in good["core_id"]:
        assert {p.name for p in (first_run.run_dir / core).iterdir()} == CORE_FILES
    assert [p.name for p in (first_run.run_dir / "SYN-003").iterdir()] == ["log.txt"]
    assert "required column 'depth_cm'" in (first_run.run_dir / "SYN-003" / "log.txt").read_text()
    assert (first_run.run_dir / "stack.parquet").is_file()


def test_run_folder_is_complete_and_manifest_lists_outputs(first_run):
    run = first_run.run_dir
    assert not (run / ".downcore-in-progress").exists()
    assert not [p for p in run.rglob(".*")], "no temporary file may remain"
    manifest = read_manifest(run)
    assert set(manifest["outputs"]) == {p.relative_to(run).as_posix() for p in run.rglob("*")
                                        if p.is_file() and p.name != "manifest.json"}
    assert manifest["seeds"]["run_seed"] == 20261201
    assert "chronology/SYN-000" in manifest["seeds"]["streams"]
    assert any(e["role"] == "curves" for e in manifest["inputs"])
    timings = pd.read_csv(run / "timings.csv")
    assert set(timings["stage"]) >= {"ingest", "chronology", "events"}


def test_rerun_is_byte_identical_and_fully_reused(small_archive, first_run):
    root, config = small_archive
    again = _run(config, root / "runs" / "second", root / "cache")
    assert _parquet_bytes(again.run_dir) == _parquet_bytes(first_run.run_dir)
    assert again.timings["reused"].all()


def test_out_folder_that_is_not_empty_is_refused(small_archive, first_run):
    root, config = small_archive
    with pytest.raises(RunFolderError, match="not empty"):
        _run(config, first_run.run_dir, root / "cache")


def test_new_curve_recomputes_chronology_and_later_not_ingest(tmp_path):
    config = write_archive(tmp_path, n_cores=2, ensemble=30, n_dates=4, n_samples=12, extra_config=FULL_CHAIN)
    first = _run(config, tmp_path / "r1", tmp_path / "cache")
    assert not first.timings["reused"].any()
    write_curve(tmp_path / "curves" / "invented.14c", shift_14c=60.0)  # a "curve update"
    second = _run(config, tmp_path / "r2", tmp_path / "cache")
    reused = second.timings.set_index(["core_id", "stage"])["reused"]
    assert reused.xs("ingest", level="stage").all()
    for stage in ("chronology", "calibration", "reconstruction", "events"):
        assert not reused.xs(stage, level="stage").any(), stage
    a = read_parquet(first.run_dir / "SYN-000" / "chronology.parquet")
    b = read_parquet(second.run_dir / "SYN-000" / "chronology.parquet")
    assert (b["age_median"] - a["age_median"]).abs().max() > 10.0  # the new curve moved the ages


def test_changed_core_file_recomputes_only_that_core(tmp_path):
    config = write_archive(tmp_path, n_cores=2, ensemble=30, n_dates=4, n_samples=12)
    _run(config, tmp_path / "r1", tmp_path / "cache")
    dates = tmp_path / "cores" / "SYN-001" / "dates.csv"
    dates.write_text(dates.read_text().replace(",30\n", ",35\n", 1))
    second = _run(config, tmp_path / "r2", tmp_path / "cache")
    reused = second.timings.set_index(["core_id", "stage"])["reused"]
    assert reused.loc[("SYN-000", "ingest")] and reused.loc[("SYN-000", "chronology")]
    assert not reused.loc[("SYN-001", "ingest")] and not reused.loc[("SYN-001", "chronology")]


def test_minimal_config_runs_with_defaults_and_notes_skipped_stages(tmp_path):
    """[run] and [curves] only: chronology runs; calibration has nothing to do (noted); the
    core is "dated", not "ok"."""
    config = write_archive(tmp_path, n_cores=1, ensemble=30, n_dates=4, n_samples=12)
    outcome = _run(config, tmp_path / "r", tmp_path / "cache")
    row = outcome.summary.iloc[0]
    assert row["status"] == "dated" and row["stage_reached"] == "calibration"
    assert "reconstruction skipped" in row["notes"]
    assert (outcome.run_dir / "SYN-000" / "age_ensemble.parquet").is_file()
    # nothing calibrated, yet every sample has its ages and raw proxy in the per-sample table
    samples = read_parquet(outcome.run_dir / "SYN-000" / "samples_dated.parquet")
    assert len(samples) == 12 and samples["age_median_cal_bp"].notna().all() and samples["uk37"].notna().all()
    ensemble = read_parquet(outcome.run_dir / "SYN-000" / "age_ensemble.parquet")
    assert list(ensemble.columns[:3]) == ["depth_cm", "m0000", "m0001"] and ensemble.shape[1] == 31


def test_core_flow_runs_one_core(small_archive, tmp_path):
    from pipelines.flows.archive import core_flow
    from pipelines.flows.plan import build_plan
    from pipelines.flows.runners import ExecutorChoice, prefect_run_settings

    root, config = small_archive
    plan = build_plan(config)
    (tmp_path / "run").mkdir()
    with prefect_run_settings(ExecutorChoice()):
        row = core_flow(plan=plan, folder=str(root / "cores" / "SYN-001"), run_dir=str(tmp_path / "run"),
                        cache_dir=str(root / "cache"))
    assert row["status"] == "ok" and row["stage_reached"] == "events"
    assert (tmp_path / "run" / "SYN-001" / "events.parquet").is_file()


@pytest.mark.slow
def test_archive_of_fifty_cores_with_three_broken(tmp_path):
    config = write_archive(tmp_path, n_cores=50, broken=3, ensemble=20, n_dates=4, n_samples=10)
    outcome = _run(config, tmp_path / "run", tmp_path / "cache")
    assert len(outcome.summary) == 50
    assert sorted(outcome.failed) == broken_ids(50, 3)
    # no [calibration] section: the good cores are dated, not reconstructed
    assert (outcome.summary["status"] == "dated").sum() == 47
    assert all((outcome.run_dir / cid / "chronology.parquet").is_file()
               for cid in outcome.summary.loc[outcome.summary["status"] == "dated", "core_id"])


def test_disk_full_is_a_clear_error_and_leaves_no_result(tmp_path, monkeypatch):
    """ENOSPC while writing: every core fails with the disk message, the run stops with a
    RunFolderError naming the disk, and no manifest (no complete run) is presented."""
    import errno
    import os

    from pipelines import runfolder

    config = write_archive(tmp_path, n_cores=2, ensemble=20, n_dates=4, n_samples=10)

    real_replace = os.replace

    def no_space_for_tables(source, target):
        if str(target).endswith(".parquet"):
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        return real_replace(source, target)

    monkeypatch.setattr(runfolder.os, "replace", no_space_for_tables)
    with pytest.raises(RunFolderError, match="disk is full"):
        _run(config, tmp_path / "run", tmp_path / "cache")
    assert not (tmp_path / "run" / "manifest.json").exists()
    assert not list((tmp_path / "run").rglob("*.parquet"))
    assert not [p for p in tmp_path.rglob("*.tmp")]


def test_progress_reports_cores_done_and_stages(small_archive, tmp_path):
    import io

    from pipelines.progress import RunProgress

    root, config = small_archive
    lines = io.StringIO()
    progress = RunProgress(stream=lines, live=False)
    execute_run(config, tmp_path / "run", cache_dir=root / "cache", report=False, progress=progress)
    text = lines.getvalue().splitlines()
    assert len(text) == 4 and text[-1].startswith("[4/4]")
    assert any("SYN-003: failed (reached none)" in line for line in text)
    live = RunProgress(stream=io.StringIO(), live=True)
    execute_run(config, tmp_path / "run-live", cache_dir=root / "cache", report=False, progress=live)
    assert live.done == 4 and live.failed == 1 and live.current == {}
    quiet = io.StringIO()
    execute_run(config, tmp_path / "run-quiet", cache_dir=root / "cache", report=False,
                progress=RunProgress(quiet=True, stream=quiet))
    assert quiet.getvalue() == ""


def test_cli_run_exit_codes(small_archive, tmp_path):
    """3: run complete but a core failed; 2: --out not empty (message names the fix)."""
    from click.testing import CliRunner

    from pipelines.cli import main

    root, config = small_archive
    out = tmp_path / "cli-run"
    args = ["run", str(config), "--out", str(out), "--cache-dir", str(root / "cache"), "--no-report",
            "--workers", "2"]
    result = CliRunner().invoke(main, args)
    assert result.exit_code == 3, result.output
    assert "SYN-003" in result.output and "failed" in result.output and str(out) in result.output
    again = CliRunner().invoke(main, args)
    assert again.exit_code == 2 and "not empty" in again.output


def test_recompute_replaces_stored_results_with_the_same_bytes(small_archive, first_run):
    root, config = small_archive
    again = _run(config, root / "runs" / "recomputed", root / "cache", recompute=True)
    assert not again.timings["reused"].any()
    assert _parquet_bytes(again.run_dir) == _parquet_bytes(first_run.run_dir)
