"""Calibration curves: parsing the five-column layout, grids, mixtures, the file reader.

Outside reference: the IntCal20 curve (Reimer et al. 2020, doi:10.1017/RDC.2020.41) as
described in ../shared/reference/README.md (9,501 rows, 0-55,000 cal BP, 11 comment lines).
"""

from __future__ import annotations

import numpy as np
import pytest

from pipelines.curvefiles import read_curve_file
from proxies.chronology.curves import CalibrationCurve, curve_from_table, blend_curves, parse_curve_text
from proxies.problems import InputError

TEXT = """# a small invented curve
# cal BP, 14C age, sigma, D14C, sigma
300, 260, 12, 5.1, 1.5
100, 120, 10, 1.0, 1.2
200, 190, 11, 3.0, 1.4
"""


def test_intcal20_layout(intcal20_path):
    """Row count, order and range as documented in ../shared/reference/README.md."""
    curve = read_curve_file(intcal20_path, name="intcal20")
    assert curve.cal_bp.size == 9501
    assert curve.cal_range == (0.0, 55000.0)
    assert np.all(np.diff(curve.cal_bp) > 0)
    assert curve.c14_age[-1] == 50100 and curve.c14_sigma[-1] == 1024  # first data row of the file
    assert curve.delta14c[-1] == pytest.approx(528.5)


def test_on_grid_keeps_nodes_and_interpolates(intcal20_path):
    curve = read_curve_file(intcal20_path, name="intcal20")
    grid = curve.on_grid(1.0)
    assert grid.is_regular and grid.step == 1.0 and grid.cal_bp.size == 55001
    nodes = np.searchsorted(grid.cal_bp, curve.cal_bp)
    np.testing.assert_array_equal(grid.c14_age[nodes], curve.c14_age)
    # 20-yr rows above 25 kBP: the midpoint is the mean of its neighbours
    i = np.searchsorted(curve.cal_bp, 30000)
    mid = (curve.cal_bp[i] + curve.cal_bp[i + 1]) / 2
    assert grid.at(mid)[0] == pytest.approx((curve.c14_age[i] + curve.c14_age[i + 1]) / 2)


def test_any_row_order_and_spacing():
    shuffled = "\n".join(["#x", "200\t190  11 3.0   1.4", "", "  100;120;10;1.0;1.2", "300 ,260, 12,5.1,1.5"])
    a, b = parse_curve_text(TEXT, "a"), parse_curve_text(shuffled, "b")
    for key in ("cal_bp", "c14_age", "c14_sigma", "delta14c", "delta14c_sigma"):
        np.testing.assert_array_equal(getattr(a, key), getattr(b, key))
    np.testing.assert_array_equal(a.cal_bp, [100, 200, 300])


@pytest.mark.parametrize("bad_line, expected", [
    ("150, 170, 10, 2.0", "4 values instead of 5"),
    ("150, 170, ten, 2.0, 1.0", "not a number"),
    ("150, 170, -3, 2.0, 1.0", "negative sigma"),
    ("200, 170, 3, 2.0, 1.0", "calendar age 200 cal BP repeats line 5"),
])
def test_malformed_lines_name_file_and_line(bad_line, expected):
    text = TEXT + bad_line + "\n"
    with pytest.raises(InputError) as caught:
        parse_curve_text(text, "x", source="curves/x.14c")
    problem = caught.value.problems[0]
    assert problem.file == "curves/x.14c"
    assert problem.row == 6
    assert expected in problem.message
    assert "curves/x.14c, row 6" in str(caught.value)


def test_too_few_rows():
    with pytest.raises(InputError, match="only 1 data lines"):
        parse_curve_text("# nothing\n1,2,3,4,5\n", "x", "f")


def test_reader_names_missing_and_binary_files(tmp_path):
    with pytest.raises(InputError, match="cannot read the curve file") as caught:
        read_curve_file(tmp_path / "nope.14c")
    assert "nope.14c" in str(caught.value)
    binary = tmp_path / "b.14c"
    binary.write_bytes(b"\x00\x01\x02")
    with pytest.raises(InputError, match="binary"):
        read_curve_file(binary)
    good = tmp_path / "good.14c"
    good.write_text(TEXT, encoding="utf-8")
    assert read_curve_file(good).name == "good"


def test_curve_from_table_sorts_and_rejects_duplicates():
    curve = curve_from_table("t", [[300, 3, 1], [100, 1, 1], [200, 2, 1]])
    np.testing.assert_array_equal(curve.c14_age, [1, 2, 3])
    assert np.all(np.isnan(curve.delta14c))
    with pytest.raises(ValueError, match="more than once"):
        curve_from_table("t", [[100, 1, 1], [100, 2, 1]])


def test_at_outside_range_raises():
    curve = parse_curve_text(TEXT, "x")
    with pytest.raises(ValueError, match="outside curve 'x' range 100-300"):
        curve.at([50.0])


def test_mixture_of_two_curves():
    """mu = (1-p) mu1 + p mu2, sigma = sqrt((1-p)^2 s1^2 + p^2 s2^2) (common practice)."""
    cal = np.arange(0.0, 1001.0, 10.0)
    first = CalibrationCurve("a", cal, cal * 0.9 + 50, np.full(cal.size, 20.0))
    second = CalibrationCurve("m", cal, cal * 0.9 + 450, np.full(cal.size, 40.0))
    mix = blend_curves(first, second, 0.25, step=5.0)
    mu, sigma = mix.at([500.0])
    assert mu[0] == pytest.approx(0.75 * 500 + 0.25 * 900)
    assert sigma[0] == pytest.approx(np.hypot(0.75 * 20, 0.25 * 40))
    assert mix.step == 5.0
    np.testing.assert_allclose(blend_curves(first, second, 0.0).at(cal)[0], first.c14_age)
    with pytest.raises(ValueError, match=r"\[0, 1\]"):
        blend_curves(first, second, 1.5)


def test_a_curve_file_is_parsed_once_per_process_until_it_changes(tmp_path):
    """check and every core of a run share one parse; an edited file is read again."""
    import os

    from pipelines.curvefiles import read_curve_file_once

    path = tmp_path / "flat.14c"
    path.write_text("0,100,10,0,0\n1000,1100,10,0,0\n2000,2100,10,0,0\n", encoding="utf-8")
    first = read_curve_file_once(path, "flat")
    assert read_curve_file_once(path, "flat") is first
    path.write_text("0,200,10,0,0\n1000,1200,10,0,0\n2000,2200,10,0,0\n", encoding="utf-8")
    os.utime(path, ns=(1, 1))                      # a new modification time, whatever the clock
    second = read_curve_file_once(path, "flat")
    assert second is not first and second.at([1000.0])[0][0] == pytest.approx(1200.0)
