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
