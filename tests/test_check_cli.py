"""``downcore check``: the broken-core corpus, clean inputs, exit codes, no tracebacks."""

import hashlib
import shutil
import tomllib
from pathlib import Path

import pytest
from click.testing import CliRunner

from pipelines.cli import main
from pipelines.cli.check import rejected_rows
from proxies.problems import Problem

DATA = Path(__file__).parent / "data"
GOOD = DATA / "good_core"
BROKEN = sorted(p for p in (DATA / "broken_cores").iterdir() if p.is_dir())
#: an invented straight curve covering the good core's dates (check reads curves as run does)
STRAIGHT_CURVE = "".join(f"{cal}, {cal * 0.9 + 50:.0f}, 15, 0, 1\n" for cal in range(0, 30001, 50))
DEMO_CORES = Path(__file__).resolve().parents[1] / "demo_cores" / "cores"


def run_check(*paths):
    return CliRunner().invoke(main, ["check", *map(str, paths)])


def hashes(folder: Path) -> dict[str, str]:
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def test_the_corpus_is_large_enough():
    assert len(BROKEN) >= 72


@pytest.mark.parametrize("folder", BROKEN, ids=[p.name for p in BROKEN])
def test_broken_core_fails_naming_file_row_and_column(folder):
    expected = tomllib.loads((folder / "expected.toml").read_text())
    before = hashes(folder)
    result = run_check(folder / expected.get("check", ""))
    assert result.exit_code == 1, result.output
    assert not isinstance(result.exception, Exception) or isinstance(result.exception, SystemExit)
    assert "Traceback" not in result.output
    location = f"{folder.name}/{expected['file']}"
    if "row" in expected:
        location += f", row {expected['row']}"
    if "column" in expected:
        location += f", column '{expected['column']}'"
    lines = [line for line in result.output.splitlines() if location + ":" in line]
    assert lines, f"no line names {location!r}:\n{result.output}"
    assert all(" -- fix: " in line for line in lines)
    assert hashes(folder) == before  # inputs are byte-identical afterwards


def test_good_core_passes():
    before = hashes(GOOD)
    result = run_check(GOOD)
    assert result.exit_code == 0, result.output
    assert "GOOD-1" in result.output and "1 clean; 0 problems, 0 rejected rows" in result.output
    assert hashes(GOOD) == before


def test_good_run_config_checks_config_and_cores(tmp_path):
    shutil.copytree(GOOD, tmp_path / "cores" / "GOOD-1")
    (tmp_path / "atm.14c").write_text(STRAIGHT_CURVE)
    config = tmp_path / "run.toml"
    config.write_text('[run]\nseed = 3\ncores = ["cores/*"]\n[curves]\natmosphere = "atm.14c"\n')
    result = run_check(config)
    assert result.exit_code == 0, result.output
    assert "run config" in result.output and "GOOD-1" in result.output


def test_summary_counts_problems_and_rejected_rows_over_several_paths():
    result = run_check(GOOD, DATA / "broken_cores" / "duplicate_depth", DATA / "broken_cores" / "unknown_archive")
    assert result.exit_code == 1
    assert "3 cores checked, 1 clean; 2 problems, 1 rejected row." in result.output


def test_rejected_rows_count_distinct_table_rows_only():
    problems = [
        Problem("c/samples.csv", "a", row=4, column="x"),
        Problem("c/samples.csv", "b", row=4, column="y"),  # same row: counted once
        Problem("c/dates.csv", "c", row=4, column="x"),
        Problem("c/dates.csv", "missing column", row=1, column="error"),  # header, not a data row
        Problem("c/core.toml", "bad TOML", row=9),  # a line of a TOML file, not a table row
    ]
    assert rejected_rows(problems) == 2


@pytest.mark.parametrize(
    "arguments",
    [[], ["/no/such/folder"], [str(GOOD / "samples.csv")]],
    ids=["no-path", "missing-path", "not-a-folder-or-toml"],
)
def test_usage_errors_exit_2(arguments):
    result = CliRunner().invoke(main, ["check", *arguments])
    assert result.exit_code == 2
    assert "Usage" in result.output


def test_unreadable_config_is_reported_without_traceback(tmp_path):
    config = tmp_path / "run.toml"
    config.write_bytes(b"\xff\xfe[run]\n")
    result = run_check(config)
    assert result.exit_code == 1
    assert "run.toml" in result.output and "Traceback" not in result.output
    core_toml = tmp_path / "core.toml"
    core_toml.write_text("[core\n")
    result = run_check(core_toml)
    assert result.exit_code == 1 and "invalid TOML" in result.output


@pytest.mark.skipif(not DEMO_CORES.is_dir() or not any(DEMO_CORES.iterdir()), reason="demo cores not built")
def test_demo_cores_are_clean():
    result = run_check(*sorted(p for p in DEMO_CORES.iterdir() if p.is_dir()))
    assert result.exit_code == 0, result.output


@pytest.mark.skipif(not (DEMO_CORES.parent / "run.toml").is_file(), reason="demo run config not built")
def test_demo_run_config_is_clean():
    """The demo run config, its stage sections (each stage's Settings) and its cores check clean."""
    result = run_check(DEMO_CORES.parent / "run.toml")
    assert result.exit_code == 0, result.output


def test_a_scenario_folder_glob_checks_its_cores_and_configs_and_skips_the_rest():
    """``downcore check demo_cores/*`` (issue 2): core folders below a folder are found, run
    configs are checked with their cores, other files and folders are listed as skipped."""
    paths = sorted(str(p) for p in DEMO_CORES.parent.iterdir())
    result = CliRunner().invoke(main, ["check", *paths])
    assert result.exit_code == 0, result.output
    assert "skip " in result.output and "make_demo.py" in result.output
    assert "run config" in result.output and "ULLA-1" in result.output


def test_a_folder_of_core_folders_reports_its_broken_core(tmp_path):
    shutil.copytree(GOOD, tmp_path / "cores" / "good")
    broken = next(p for p in BROKEN if (p / "core.toml").is_file()
                  and "check" not in tomllib.loads((p / "expected.toml").read_text()))
    shutil.copytree(broken, tmp_path / "cores" / "bad")
    (tmp_path / "notes.txt").write_text("not a core")
    result = CliRunner().invoke(main, ["check", str(tmp_path / "cores"), str(tmp_path / "notes.txt")])
    assert result.exit_code == 1
    assert "skip " in result.output and "notes.txt" in result.output
    assert "FAIL" in result.output and "2 cores checked, 1 clean" in result.output
