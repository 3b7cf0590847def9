"""The README's "Python API" example runs as written, from the repository's root, and does
what its comments say (issue 10: a worked example that is executed in CI)."""

from __future__ import annotations

import contextlib
import io
import os
import re

import numpy as np

from conftest import REPO_ROOT


def _api_example() -> str:
    text = (REPO_ROOT / "README.md").read_text(encoding="utf-8")
    section = text.split("\n## Python API\n", 1)[1].split("\n## ", 1)[0]
    blocks = re.findall(r"```python\n(.*?)```", section, flags=re.S)
    assert len(blocks) == 1, "the Python API section holds one python example"
    return blocks[0]


def test_the_readme_python_api_example_runs(tmp_path, monkeypatch):
    (tmp_path / "demo_cores").symlink_to(REPO_ROOT / "demo_cores")  # as from the repository's root
    monkeypatch.chdir(tmp_path)
    namespace: dict = {"__name__": "readme_example"}
    printed = io.StringIO()
    with contextlib.redirect_stdout(printed):
        exec(compile(_api_example(), str(REPO_ROOT / "README.md"), "exec"), namespace)  # noqa: S102
    assert (tmp_path / "ULLA-1-chronology.png").stat().st_size > 10_000
    dates, summary = namespace["dates"], namespace["summary"]
    assert len(dates) >= 10 and printed.getvalue().count("median") >= len(dates)
    medians = summary["age_median"].to_numpy()
    assert np.all(np.diff(medians) >= 0), "ages never decrease down the core (equal across event layers)"
    assert np.all(summary["age_q025"] <= summary["age_median"]) and np.all(summary["age_median"] <= summary["age_q975"])
    # the core top is the collection year: 1950 - collected cal BP (within its error)
    assert abs(medians[0] - namespace["core"].top_age_cal_bp) < 20
    assert os.path.basename(namespace["figure"].axes[0].get_xlabel()) == "age [cal BP]"


def test_a_curve_as_read_needs_no_on_grid(intcal20_path):
    """IntCal20 (Reimer et al. 2020, doi:10.1017/RDC.2020.41) has uneven calendar steps (5, 10
    and 20 yr); calibrate_radiocarbon takes it as read and gives exactly what the curve put
    on the 1-yr grid by hand gives."""
    from pipelines.curvefiles import read_curve_file
    from proxies.chronology import calibrate_radiocarbon

    curve = read_curve_file(intcal20_path)
    assert not curve.is_regular
    ages, errors = [2450.0, 9100.0, 20500.0], [30.0, 45.0, 120.0]
    as_read = calibrate_radiocarbon(ages, errors, curve)
    by_hand = calibrate_radiocarbon(ages, errors, curve.on_grid(1.0))
    assert as_read.step == by_hand.step == 1.0
    np.testing.assert_array_equal(as_read.start, by_hand.start)
    np.testing.assert_array_equal(as_read.values, by_hand.values)
