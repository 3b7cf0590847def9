"""``downcore replay`` and ``downcore compare``."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner

from archive_factory import FULL_CHAIN, write_archive, write_curve
from pipelines.cli import main
from pipelines.compare import compare_runs
from pipelines.flows.run import execute_run
from pipelines.flows.runners import ExecutorChoice
from pipelines.replay import compare_tables


@pytest.fixture(scope="module")
def recorded(tmp_path_factory, prefect_harness):
    root = tmp_path_factory.mktemp("recorded")
    config = write_archive(root, n_cores=2, ensemble=40, n_dates=4, n_samples=15, extra_config=FULL_CHAIN)
    outcome = execute_run(config, root / "runs" / "a", cache_dir=root / "cache", report=False,
                          choice=ExecutorChoice(workers=2))
    return root, config, outcome.run_dir


def test_replay_of_a_run_is_identical_and_exits_zero(recorded):
    root, _, run = recorded
    result = CliRunner().invoke(main, ["replay", str(run / "manifest.json"), "--out", str(root / "runs" / "replay"),
                                       "--workers", "2", "-q"])
    assert result.exit_code == 0, result.output
    report = pd.read_csv(root / "runs" / "replay-replay.csv")
    tables = report[report["kind"] == "table"]
    assert len(tables) >= 20 and set(tables["verdict"]) == {"identical"}
    assert "different" not in set(report["verdict"])


def test_replay_reports_a_changed_input_and_exits_non_zero(recorded, tmp_path):
    root, _, run = recorded
    samples = root / "cores" / "SYN-001" / "samples.csv"
    original = samples.read_text()
    try:
        samples.write_text(original.replace("0.0100", "0.0200", 1))
        result = CliRunner().invoke(main, ["replay", str(run), "--out", str(tmp_path / "r"), "-q"])
    finally:
        samples.write_text(original)
    assert result.exit_code == 2
    assert "changed" in result.output and "samples.csv" in result.output


def test_compare_after_a_curve_update_shows_the_age_shift(recorded, tmp_path):
    """Adding 60 14C yr to the invented curve (slope d14C/dcal between 0.91 and 1.03, see
    archive_factory) maps each measured 14C age to a calendar age ~58-66 yr younger; the core
    top stays at its known age, so the median shift over depths is a little smaller."""
    root, config, run_a = recorded
    curve = root / "curves" / "invented.14c"
    original = curve.read_text()
    try:
        write_curve(curve, shift_14c=60.0)
        run_b = execute_run(config, tmp_path / "b", cache_dir=root / "cache", report=False,
                            choice=ExecutorChoice(workers=2)).run_dir
    finally:
        curve.write_text(original)
    table = compare_runs(run_a, run_b).set_index("core_id")
    assert list(table.index) == ["SYN-000", "SYN-001"]
    assert table["age_shift_median_yr"].between(-80.0, -30.0).all(), table["age_shift_median_yr"]
    # the largest shift over depths also carries the Monte Carlo noise of two ensembles' medians
    # (the default memory model draws ages within ~20-yr grid cells)
    assert table["age_shift_max_abs_yr"].between(-100.0, -50.0).all(), table["age_shift_max_abs_yr"]
    out = tmp_path / "cmp.csv"
    result = CliRunner().invoke(main, ["compare", str(run_a), str(run_b), "--out", str(out)])
    assert result.exit_code == 0, result.output
    assert "SYN-000" in result.output
    written = pd.read_csv(out)
    assert np.allclose(written["age_shift_median_yr"], table["age_shift_median_yr"].to_numpy())


def test_compare_tables_tolerance():
    a = pd.DataFrame({"x": [1.0, 2.0, np.nan], "v": ["a", "b", "c"]})
    assert compare_tables(a, a.assign(x=a["x"] * (1 + 1e-12)))[0]
    assert not compare_tables(a, a.assign(x=a["x"] + 1e-6))[0]
    assert not compare_tables(a, a.assign(v=["a", "b", "d"]))[0]
    assert not compare_tables(a, a.assign(x=[1.0, np.nan, np.nan]))[0]


def _tampered_copy(run, target, change):
    """A copy of a recorded run whose ``chronology.parquet`` of SYN-000 is replaced by
    ``change(path)`` and whose manifest records the new bytes (as if the recorded run had
    produced them), so that the replay meets a recorded output unlike its own."""
    import json
    import shutil

    from pipelines.runfolder import sha256_file

    shutil.copytree(run, target)
    table = target / "SYN-000" / "chronology.parquet"
    table.unlink()
    change(table)
    manifest = json.loads((target / "manifest.json").read_text())
    manifest["outputs"]["SYN-000/chronology.parquet"]["sha256"] = sha256_file(table)
    (target / "manifest.json").write_text(json.dumps(manifest))
    return target


def test_replay_of_a_different_output_exits_one(recorded, tmp_path):
    from pipelines.runfolder import atomic_write_parquet, read_parquet

    root, _, run = recorded
    original = read_parquet(run / "SYN-000" / "chronology.parquet")
    copy = _tampered_copy(run, tmp_path / "recorded", lambda path: atomic_write_parquet(
        path, original.assign(age_median=original["age_median"] + 1.0)))
    result = CliRunner().invoke(main, ["replay", str(copy), "--out", str(tmp_path / "r"), "-q"])
    assert result.exit_code == 1, result.output
    report = pd.read_csv(tmp_path / "r-replay.csv").set_index("path")
    assert report.loc["SYN-000/chronology.parquet", "verdict"] == "different"
    assert "age_median" in report.loc["SYN-000/chronology.parquet", "detail"]


def test_a_comparison_that_fails_is_an_error_not_a_difference(recorded, tmp_path):
    """An unreadable recorded table: verdict ``error`` naming it, exit 4 (README), table written."""
    root, _, run = recorded
    copy = _tampered_copy(run, tmp_path / "recorded", lambda path: path.write_bytes(b"not parquet"))
    result = CliRunner().invoke(main, ["replay", str(copy), "--out", str(tmp_path / "r"), "-q"])
    assert result.exit_code == 4, result.output
    assert "SYN-000/chronology.parquet" in result.output and "could not compare" in result.output
    report = pd.read_csv(tmp_path / "r-replay.csv").set_index("path")
    assert report.loc["SYN-000/chronology.parquet", "verdict"] == "error"
    assert "different" not in set(report["verdict"])


def test_an_unreadable_manifest_exits_two_before_anything_runs(tmp_path):
    (tmp_path / "manifest.json").write_text("{not json")
    result = CliRunner().invoke(main, ["replay", str(tmp_path / "manifest.json"), "--out", str(tmp_path / "r")])
    assert result.exit_code == 2 and "downcore replay" in result.output
    assert not (tmp_path / "r").exists()


def test_exit_status_precedence():
    """Input changes (2) before comparison errors (4) before differences (1) (README)."""
    from pipelines.cli.replay import exit_status
    from pipelines.manifest import InputChange
    from pipelines.replay import OutputVerdict, ReplayReport

    def report(*verdicts, changed=False):
        changes = [InputChange("x", "core", "a", "b")] if changed else []
        return ReplayReport(recorded_dir=None, replay_dir=None, input_changes=changes,
                            verdicts=[OutputVerdict(f"f{i}", "table", v) for i, v in enumerate(verdicts)])

    assert exit_status(report("identical", "within tolerance", "same content", "not compared")) == 0
    assert exit_status(report("identical", "missing")) == 1
    assert exit_status(report("new")) == 1
    assert exit_status(report("different", "error")) == 4
    assert exit_status(report("error", changed=True)) == 2


def test_replay_into_an_unwritable_place_is_refused_with_exit_two(recorded, tmp_path):
    from readonly import read_only_folder

    _, _, run = recorded
    with read_only_folder(tmp_path / "ro") as parent:
        result = CliRunner().invoke(main, ["replay", str(run), "--out", str(parent / "r"), "-q"])
    assert result.exit_code == 2 and "cannot be written" in result.output, result.output
