"""Time grid, per-member cell means and interpolation (proxies.reconstruction.grid)."""

from __future__ import annotations

import numpy as np
import pytest

from proxies.reconstruction.grid import (bin_means, cal_bp_to_ce, ce_to_cal_bp, fill_gaps,
                                         interpolate_members, regular_grid)


def test_cal_bp_and_ce_round_trip():
    """CE = 1950 - BP (definition of 'before present', common practice)."""
    assert cal_bp_to_ce(0) == 1950
    assert cal_bp_to_ce(-50) == 2000
    assert cal_bp_to_ce(9300) == -7350
    np.testing.assert_allclose(ce_to_cal_bp(cal_bp_to_ce([-68.0, 1234.5])), [-68.0, 1234.5])


def test_regular_grid_is_on_multiples_of_the_step():
    grid = regular_grid(-68.0, 1033.0, 50.0)
    assert grid[0] == -50.0 and grid[-1] == 1050.0
    np.testing.assert_allclose(np.diff(grid), 50.0)
    assert np.all(np.mod(grid, 50.0) == 0)
    with pytest.raises(ValueError):
        regular_grid(0, 100, 0)
    with pytest.raises(ValueError):
        regular_grid(100, 0, 10)


def test_bin_means_match_a_loop_with_member_specific_ages():
    """Independent check: the same means by an explicit loop over members and cells."""
    rng = np.random.default_rng(0)
    n, m = 40, 7
    ages = np.sort(rng.uniform(0, 1000, (n, m)), axis=0)   # each member its own ages
    values = rng.normal(size=(n, m))
    values[3, 2] = np.nan
    grid = regular_grid(0, 1000, 100)
    means, counts = bin_means(ages, values, grid)
    for j in range(m):
        for k, centre in enumerate(grid):
            inside = (ages[:, j] >= centre - 50) & (ages[:, j] < centre + 50) & np.isfinite(values[:, j])
            assert counts[k, j] == inside.sum()
            if inside.any():
                assert means[k, j] == pytest.approx(values[inside, j].mean())
            else:
                assert np.isnan(means[k, j])


def test_empty_cells_stay_empty_and_are_counted():
    ages = np.array([[10.0], [20.0], [260.0]])
    values = np.array([[1.0], [3.0], [5.0]])
    means, counts = bin_means(ages, values, regular_grid(0, 300, 100))
    np.testing.assert_array_equal(counts[:, 0], [2, 0, 0, 1])
    assert means[0, 0] == 2.0 and means[3, 0] == 5.0
    assert np.isnan(means[1, 0]) and np.isnan(means[2, 0])


def test_interpolation_matches_numpy_and_does_not_extrapolate():
    ages = np.array([[100.0, 150.0], [300.0, 350.0], [500.0, 400.0]])
    values = np.array([[1.0, 0.0], [3.0, 2.0], [5.0, 4.0]])
    grid = regular_grid(0, 600, 100)
    out = interpolate_members(ages, values, grid)
    np.testing.assert_allclose(out[1:6, 0], np.interp(grid[1:6], ages[:, 0], values[:, 0]))
    assert np.isnan(out[0, 0]) and np.isnan(out[6, 0])
    assert np.isnan(out[1, 1]) and np.isnan(out[5, 1])      # outside 150..400
    assert out[2, 1] == pytest.approx(0.5)                   # 200: a quarter from (150,0) to (350,2)


def test_fill_gaps_interpolates_inside_and_holds_edges():
    x = np.array([[np.nan, 1.0], [2.0, np.nan], [np.nan, 3.0], [6.0, np.nan]])
    filled = fill_gaps(x)
    np.testing.assert_allclose(filled[:, 0], [2.0, 2.0, 4.0, 6.0])
    np.testing.assert_allclose(filled[:, 1], [1.0, 2.0, 3.0, 3.0])


def test_automatic_step_follows_the_sample_spacing():
    """Median spacing rounded to the nearest 1-2-5 step on a log scale (common practice for
    bin widths); coarsened when the grid would exceed MAX_GRID_CELLS cells."""
    from proxies.reconstruction.grid import (MAX_GRID_CELLS, auto_grid_step_yr,
                                             median_sample_spacing_yr, round_to_standard_step)

    ages = np.cumsum(np.random.default_rng(1).uniform(100.0, 300.0, 60))
    spacing = median_sample_spacing_yr(ages[::-1])  # order does not matter
    assert 150.0 < spacing < 250.0 and round_to_standard_step(spacing) == 200.0
    assert [round_to_standard_step(v) for v in (0.4, 1.4, 1.5, 3.2, 7.0, 14.0, 15.0, 35.0, 70.0, 72.0)] == \
        [1.0, 1.0, 2.0, 5.0, 5.0, 10.0, 20.0, 50.0, 50.0, 100.0]
    assert np.isnan(median_sample_spacing_yr([5.0, np.nan]))
    assert auto_grid_step_yr(200.0, 9000.0) == 200.0
    step = auto_grid_step_yr(1.0, 12000.0)
    assert 12000.0 / step <= MAX_GRID_CELLS and step == 5.0


def test_filled_bridges_short_gaps_only():
    """One member, samples at 0, 100, 200 and 800 yr: with max_gap_yr = 300 the cells between
    200 and 800 stay empty, the others get cell means or the straight line between samples."""
    from proxies.reconstruction.grid import bin_means_filled

    ages = np.array([[0.0], [100.0], [200.0], [800.0]])
    values = np.array([[0.0], [1.0], [2.0], [8.0]])
    grid = regular_grid(0.0, 800.0, 50.0)
    filled, counts = bin_means_filled(ages, values, grid, max_gap_yr=300.0)
    col = filled[:, 0]
    np.testing.assert_allclose(col[grid <= 200.0], grid[grid <= 200.0] / 100.0)
    assert np.isnan(col[(grid > 200.0) & (grid < 800.0)]).all() and col[-1] == 8.0
    assert counts[:, 0].sum() == 4
    everything, _ = bin_means_filled(ages, values, grid)
    np.testing.assert_allclose(everything[:, 0], grid / 100.0)
