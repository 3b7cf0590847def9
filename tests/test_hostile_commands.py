"""Hostile command lines and run configs met outside `check`: refused with a message, never a
traceback."""

from pathlib import Path

import pytest
from click.testing import CliRunner

from pipelines.cli import main
from proxies.problems import InputError

DEMO = Path(__file__).resolve().parents[1] / "demo_cores"


@pytest.mark.parametrize("step", ["0", "-1", "1e9"])
def test_radiocarbon_step_out_of_range_is_a_usage_error(step):
    result = CliRunner().invoke(main, ["radiocarbon", "4520:35", "--curve",
                                       str(DEMO / "curves" / "invented_atmosphere.14c"), "--step", step])
    assert result.exit_code == 2 and "--step" in result.output
    assert not isinstance(result.exception, Exception) or isinstance(result.exception, SystemExit)


def test_run_config_with_a_latin1_comment_is_refused_naming_the_encoding(tmp_path):
    from pipelines.flows.plan import build_plan

    config = tmp_path / "run.toml"
    config.write_bytes(b"# caf\xe9\n" + (DEMO / "run_minimal.toml").read_bytes())
    with pytest.raises(InputError) as caught:
        build_plan(config)
    (problem,) = caught.value.problems
    assert problem.file == str(config) and problem.row == 1 and "not UTF-8" in problem.message


def test_check_folds_repeated_problems_and_lists_skipped_comment_lines(tmp_path):
    import shutil

    core = shutil.copytree(Path(__file__).parent / "data" / "good_core", tmp_path / "GOOD-1")
    lines = (core / "samples.csv").read_text().splitlines()
    bad = [lines[0]] + [line.replace(",1,", ",1 cm,", 1) for line in lines[1:]]  # every thickness bad
    (core / "samples.csv").write_text("# lab sheet v2\n# operator: invented\n" + "\n".join(bad) + "\n")
    result = CliRunner().invoke(main, ["check", str(core)])
    assert result.exit_code == 1
    assert "rows 1-2: 2 '#' comment line(s) before the header, skipped" in result.output
    folded = [line for line in result.output.splitlines() if "(12 rows)" in line]
    assert len(folded) == 1 and "rows 4-15 (12 rows), column 'thickness_cm'" in folded[0], result.output


def test_problems_are_listed_in_row_order_file_by_file():
    from pipelines.cli.check import folded, in_row_order
    from proxies.problems import Problem

    problems = [Problem("b.csv", "x", "f", row=9), Problem("a.csv", "y", "f", row=5), Problem("b.csv", "x", "f", row=2),
                Problem("b.csv", "x", "f", row=3)]
    assert [(p.file, p.row) for p in in_row_order(problems)] == [("b.csv", 2), ("b.csv", 3), ("b.csv", 9),
                                                                 ("a.csv", 5)]
    assert folded(problems)[0] == "b.csv, rows 2-3, 9 (3 rows): x -- fix: f"
