"""Archive-wide error control (Benjamini & Hochberg 1995) and lead/lag across cores:
exactness of the computations (fast tests)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from statsmodels.stats.multitest import multipletests

from proxies.events import EventSettings
from proxies.events.fdr import ARCHIVE_EVENT_COLUMNS, archive_event_table, benjamini_hochberg
from proxies.events.leadlag import difference_quantiles, lag_summary, lead_lag_table, lead_probability


def test_benjamini_hochberg_matches_an_independent_implementation():
    """Against statsmodels' 'fdr_bh' (an independent implementation of Benjamini &
    Hochberg 1995), including ties, order and NaN."""
    rng = np.random.default_rng(3)
    p = np.concatenate([rng.uniform(0, 1, 40), rng.uniform(0, 0.01, 10), [0.02, 0.02]])
    rng.shuffle(p)
    expected = multipletests(p, method="fdr_bh")[1]
    assert np.allclose(benjamini_hochberg(p), expected)
    with_nan = np.append(p, np.nan)
    assert np.isnan(benjamini_hochberg(with_nan)[-1])
    assert np.allclose(benjamini_hochberg(with_nan)[:-1], expected)
    # hand example: m = 4, p = .01 .02 .03 .5 -> q = .04 .04 .04 .5
    assert np.allclose(benjamini_hochberg([0.03, 0.5, 0.01, 0.02]), [0.04, 0.5, 0.04, 0.04])
    with pytest.raises(ValueError):
        benjamini_hochberg([0.5, 1.5])


def _events(core, p, significant=None, onset=5000.0):
    n = len(p)
    return pd.DataFrame({"core_id": core, "event_id": [f"t-E{k + 1:02d}" for k in range(n)], "variable": "t",
                         "kind": "shift", "direction": "positive", "onset_median": onset,
                         "onset_q025": onset - 100, "onset_q975": onset + 100, "amplitude_median": 1.0,
                         "amplitude_q025": 0.5, "amplitude_q975": 1.5, "probability": 0.9,
                         "p_value": p, "significant": [x < 0.05 for x in p] if significant is None else significant,
                         "note": ""})


def test_archive_table_puts_the_q_value_beside_each_p_value():
    table = archive_event_table({"B": _events("B", [0.04, 0.2]), "A": _events("A", [0.001, 0.03])}, 0.05)
    assert list(table.columns) == ARCHIVE_EVENT_COLUMNS
    assert table["core_id"].tolist() == ["A", "A", "B", "B"]
    assert np.allclose(table["q_value"], benjamini_hochberg([0.001, 0.03, 0.04, 0.2]))
    # 0.03 and 0.04 are significant on their own but not after FDR control over 4 tests
    assert table["survives_fdr"].tolist() == [True, False, False, False]
    assert table["significant"].tolist() == [True, True, True, False]
    empty = archive_event_table({}, 0.05)
    assert list(empty.columns) == ARCHIVE_EVENT_COLUMNS and len(empty) == 0


def test_series_searched_without_events_count_in_the_family_with_p_one():
    """A searched series without any reported event is one more hypothesis with p = 1:
    BH over the given p-values plus that many ones (statsmodels' 'fdr_bh' as the reference)."""
    p = [0.001, 0.03, 0.04, 0.2]
    expected = multipletests(p + [1.0] * 6, method="fdr_bh")[1][:4]
    assert np.allclose(benjamini_hochberg(p, n_tests=10), expected)
    assert np.allclose(benjamini_hochberg(p, n_tests=2), benjamini_hochberg(p))  # never fewer than given
    # cores A and B (one variable each) have events; 8 more series were searched without any
    table = archive_event_table({"B": _events("B", [0.04, 0.2]), "A": _events("A", [0.001, 0.03])}, 0.05,
                                searched=10)
    assert np.allclose(table["q_value"], multipletests(p + [1.0] * 8, method="fdr_bh")[1][:4])
    assert table["survives_fdr"].tolist() == [True, False, False, False]
    assert table["q_value"].iloc[0] == pytest.approx(0.001 * 12 / 1)  # 4 events + 8 empty series


def test_difference_quantiles_are_those_of_all_member_pairs():
    rng = np.random.default_rng(1)
    a, b = rng.normal(12000, 80, 300), rng.gamma(2.0, 40.0, 250) + 11800
    d = (a[:, None] - b[None, :]).ravel()
    levels = (0.5, 0.025, 0.975)
    assert np.allclose(difference_quantiles(a, b, levels), np.quantile(d, levels, method="inverted_cdf"))
    assert lead_probability(a, b) == pytest.approx(np.mean(d > 0) + 0.5 * np.mean(d == 0))
    assert lead_probability(np.array([1.0, 2.0]), np.array([2.0])) == pytest.approx(0.25)
    paired = lag_summary(np.array([10.0, 20.0, 30.0]), np.array([0.0, 10.0, 20.0]), paired=True)
    assert paired["lag_median_yr"] == 10.0 and paired["probability_a_leads"] == 1.0


def test_lead_lag_table_pairs_one_event_across_cores():
    rng = np.random.default_rng(2)
    events = pd.concat([_events("A", [0.01], onset=11700.0), _events("B", [0.01], onset=11500.0),
                        _events("C", [0.01], onset=8000.0)], ignore_index=True)
    onsets = pd.concat([pd.DataFrame({"core_id": c, "event_id": "t-E01", "member": np.arange(200),
                                      "onset_cal_bp": rng.normal(m, 30, 200)})
                        for c, m in (("A", 11700.0), ("B", 11500.0), ("C", 8000.0))], ignore_index=True)
    table = lead_lag_table(events, onsets, 1000.0)
    assert len(table) == 1  # C's event is 3,500 yr away: another event
    row = table.iloc[0]
    assert (row["core_a"], row["core_b"]) == ("A", "B")
    assert row["lag_q025_yr"] < 200 < row["lag_q975_yr"] and row["probability_a_leads"] > 0.99
    assert row["n_members_a"] == row["n_members_b"] == 200


def test_lead_lag_settings_are_declared():
    s = EventSettings.from_mapping({"lead_lag_window_yr": 500, "lead_lag_group": ["sst", "air_temperature"]})
    assert s.lead_lag_window_yr == 500 and s.lead_lag_group == ("sst", "air_temperature")


def test_lead_lag_figure_draws_one_lane_per_core_pair():
    from pipelines.report.figures_events import lead_lag_figure

    table = pd.DataFrame({"core_a": ["A", "A"], "core_b": ["B", "C"], "variable": "t", "kind": "shift",
                          "lag_median_yr": [200.0, -50.0], "lag_q025_yr": [50.0, -250.0],
                          "lag_q975_yr": [350.0, 150.0], "probability_a_leads": [0.99, 0.3]})
    fig = lead_lag_figure(table)
    ax = fig.axes[0]
    assert len(ax.patches) == 2 and ax.patches[0].get_x() == 50.0 and ax.patches[0].get_width() == 300.0
    assert "P(a leads) = 0.99" in ax.get_yticklabels()[0].get_text()
    assert lead_lag_figure(table.iloc[0:0]) is None


def test_report_shows_which_events_survive_fdr(tmp_path):
    import sys
    from pathlib import Path

    sys.path.insert(0, str(Path(__file__).parent))
    from run_folder_factory import make_run_folder

    from pipelines.report import write_run_report

    run = tmp_path / "run"
    make_run_folder(run)
    archive_event_table({"A": _events("A", [0.001, 0.2]), "B": _events("B", [0.04])}, 0.05).to_parquet(
        run / "archive_events.parquet")
    pd.DataFrame({"core_a": ["A"], "event_a": ["t-E01"], "core_b": ["B"], "event_b": ["t-E01"], "variable": ["t"],
                  "kind": ["shift"], "direction": ["positive"], "lag_median_yr": [120.0], "lag_q025_yr": [10.0],
                  "lag_q975_yr": [260.0], "probability_a_leads": [0.98], "n_members_a": [40],
                  "n_members_b": [40]}).to_parquet(run / "lead_lag.parquet")
    text = write_run_report(run).read_text(encoding="utf-8")
    assert "Events across the archive" in text
    assert "1 of 3 events survive false discovery rate control" in text  # B: p 0.04, q 0.06
    assert (run / "figures" / "lead_lag.svg").is_file()
