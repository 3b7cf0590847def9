"""Chronology figures: the hiatus is marked and its spike does not set the deposition-time
scale; the hyper-parameter panels are the marginal posterior weights."""

from __future__ import annotations

import numpy as np
import pandas as pd

from pipelines.report.figures_chronology import (age_depth_figure, deposition_time_figure, hiatus_marks,
                                                 hyperparameter_figure)
from pipelines.report.rundata import CoreData
from proxies.chronology import ChronologySettings, build_chronology
from proxies.cores import Core


def _result():
    from proxies.chronology.curves import CalibrationCurve

    cal = np.arange(-100.0, 20001.0, 5.0)
    curve = CalibrationCurve("straight", cal, 0.9 * cal + 50, np.full(cal.size, 15.0))
    depth = np.array([20.0, 60, 100, 140, 180, 220])
    age = -68 + 10 * depth + np.where(depth > 150, 3000.0, 0.0)  # a 3,000-yr hiatus at 150 cm
    dates = pd.DataFrame({"label": [f"H{i}" for i in range(6)], "depth_cm": depth, "kind": "radiocarbon",
                          "age": np.round(0.9 * age + 50), "error": 30.0, "thickness_cm": 0.0, "curve": None,
                          "reservoir_offset": 0.0, "reservoir_error": 0.0, "exclude": False,
                          "source_row": np.arange(2, 8)})
    core = Core(id="H-1", archive="lake", latitude=1.0, longitude=1.0, collected_ce=2018, site="invented",
                top_age_error=None, samples=pd.DataFrame({"depth_cm": np.arange(0.0, 231.0, 10.0)}), dates=dates,
                counts=None, hiatuses_cm=(150.0,), folder="cores/H-1")
    return build_chronology(core, {"atmosphere": curve}, ChronologySettings(), 300, np.random.default_rng(2))


def _core_data(result):
    members = pd.DataFrame(result.ensemble, columns=[f"m{i:04d}" for i in range(result.ensemble.shape[1])])
    members.insert(0, "depth_cm", result.depth_cm)
    return CoreData(core_id="H-1", status="ok", tables={
        "chronology": result.summary, "age_ensemble": members, "dates": result.dates,
        "hyperparameters": result.hyperparameters})


def test_hiatus_is_marked_and_does_not_flatten_the_deposition_time():
    result = _result()
    marks = hiatus_marks(result.summary)
    assert len(marks) == 1 and marks[0][0] == 150.0
    assert 2000 < marks[0][1] < 4000  # the planted 3,000-yr gap
    core = _core_data(result)
    for fig in (age_depth_figure(core), deposition_time_figure(core)):
        ax = fig.axes[0]
        dash_dot = [ln for ln in ax.lines if ln.get_linestyle() == "-." and np.allclose(ln.get_ydata(), 150.0)]
        assert dash_dot, "the hiatus line is missing"
        assert any("hiatus" in t.get_text() for t in ax.texts)
    ax = deposition_time_figure(core).axes[0]
    # the scale follows the ~10 yr/cm sediment, not the ~3,000 yr/cm spike across the hiatus
    assert ax.get_xlim()[1] < 100
    median = next(ln for ln in ax.lines if ln.get_label() == "median of members")
    assert np.nanmax(median.get_xdata()) < 100


def test_hyperparameter_panels_are_marginal_weights():
    result = _result()
    fig = hyperparameter_figure(_core_data(result))
    hyper = result.hyperparameters
    assert len(fig.axes) == 3  # memory model: mean rate, variability, memory
    for ax, column in zip(fig.axes, ("mean_rate_yr_cm", "rate_variability", "rate_memory")):
        heights = [p.get_height() for p in ax.patches]
        np.testing.assert_allclose(heights, hyper.groupby(column)["weight"].sum().sort_index().to_numpy())
    assert hyper["weight"].sum() == np.float64(1.0) or abs(hyper["weight"].sum() - 1) < 1e-9
