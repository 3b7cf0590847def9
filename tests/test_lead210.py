"""210Pb dating (CRS and CIC; Appleby & Oldfield 1978, half-life 22.23 yr) against the
analytical ages of simulated profiles."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from proxies.chronology.lead210 import PB210_DECAY_PER_YR, cic_ages, crs_ages, lead210_ages


def _constant_flux_profile():
    """Constant 210Pb supply P with a mass accumulation rate that varies by +-50 %: the excess of
    a layer of age t is P / r(t) exp(-lambda t), so the CRS age is exactly t (the inventory below
    it is P exp(-lambda t) / lambda)."""
    t = np.arange(0.5, 300.0, 1.0)  # long enough that the extrapolated tail is negligible
    rate = 0.02 * (1 + 0.5 * np.sin(t / 9.0))  # g cm-2 yr-1
    mass = np.cumsum(rate * 1.0) - rate[0] * 0.5
    excess = 1.0 / rate * np.exp(-PB210_DECAY_PER_YR * t)
    return t, mass, excess


def test_crs_recovers_the_analytical_ages_of_a_constant_flux_profile():
    t, mass, excess = _constant_flux_profile()
    ages = crs_ages(mass, excess)
    young = t <= 100
    np.testing.assert_allclose(ages[young], t[young], atol=1.0)


def test_cic_recovers_a_constant_rate_profile():
    """Constant initial concentration C0 and constant rate r: C = C0 exp(-lambda m / r), t = m / r."""
    rate = 0.05
    mass = np.linspace(0.05, 6.0, 40)
    excess = 300.0 * np.exp(-PB210_DECAY_PER_YR * mass / rate)
    np.testing.assert_allclose(cic_ages(mass, excess), mass / rate, rtol=1e-9)


def test_monte_carlo_errors_and_supported_activity():
    t, mass, excess = _constant_flux_profile()
    pick = np.arange(0, t.size, 6)
    table = pd.DataFrame({"depth_cm": np.arange(pick.size, dtype=float), "dry_mass_g_cm2": mass[pick],
                          "pb210_bq_kg": excess[pick] * 10 + 25.0, "pb210_error": 0.03 * excess[pick] * 10 + 1.0,
                          "ra226_bq_kg": 25.0, "ra226_error": 1.0})
    out = lead210_ages(table, "crs", 300, np.random.default_rng(1))
    truth = np.interp(out["depth_cm"], np.arange(pick.size), t[pick])
    young = truth < 80
    assert np.all(np.abs(out["age_yr"][young] - truth[young]) < 3 * out["error_yr"][young] + 2)
    assert np.all(np.diff(out["error_yr"][young]) > -1.0)  # errors grow with age (roughly)
    assert out["error_yr"][young].iloc[-1] > 3 * out["error_yr"].iloc[0]
    # without 226Ra the deepest samples give the background: the same ages within the errors
    background = lead210_ages(table.drop(columns=["ra226_bq_kg", "ra226_error"]), "crs", 300,
                              np.random.default_rng(2))
    common = background["depth_cm"].isin(out["depth_cm"]) & (background["age_yr"] < 60)
    merged = background[common].merge(out, on="depth_cm")
    assert np.all(np.abs(merged["age_yr_x"] - merged["age_yr_y"]) < 3 * np.hypot(merged["error_yr_x"],
                                                                                 merged["error_yr_y"]) + 2)


def _write_core(folder, lead_csv):
    folder.mkdir()
    (folder / "core.toml").write_text('[core]\nid = "PB-1"\narchive = "lake"\nlatitude = 60.0\nlongitude = 10.0\n'
                                      'collected = 2020\n\n[files]\nsamples = "samples.csv"\ndates = "dates.csv"\n'
                                      'lead210 = "lead210.csv"\n')
    (folder / "samples.csv").write_text("depth_cm,uk37\n0,0.5\n10,0.52\n30,0.51\n60,0.5\n")
    (folder / "dates.csv").write_text("label,depth_cm,kind,age,error\nR1,55,radiocarbon,1200,30\n")
    (folder / "lead210.csv").write_text(lead_csv)
    return folder


def _profile_csv(rows=None):
    t, mass, excess = _constant_flux_profile()
    pick = np.arange(0, 200, 10)
    lines = ["depth_cm,dry_mass_g_cm2,pb210_bq_kg,pb210_error,ra226_bq_kg,ra226_error"]
    for k, i in enumerate(pick):
        lines.append(f"{k * 1.0:g},{mass[i]:.5f},{excess[i] * 10 + 25:.3f},{0.03 * excess[i] * 10 + 1:.3f},25,1")
    if rows:
        for index, line in rows.items():
            lines[index] = line
    return "\n".join(lines) + "\n"


def test_bad_lead210_table_names_file_row_and_column(tmp_path):
    from pipelines.ingest import inspect_core

    csv = _profile_csv({3: "2,0.05,-4,1,25,1", 6: "3.5,0.9,100,2,25,1"})  # negative activity; 3.5 after 4
    core, problems = inspect_core(_write_core(tmp_path / "PB-1", csv), year=2026)
    assert core is None
    where = {(p.file.split("/")[-1], p.row, p.column) for p in problems}
    assert ("lead210.csv", 4, "pb210_bq_kg") in where
    assert any(p.column == "depth_cm" and p.row == 7 and "sort the rows" in p.fix for p in problems)
    assert all(p.fix for p in problems)


def test_lead210_ages_enter_the_age_model_as_constraints(tmp_path):
    from pipelines.ingest import load_core
    from proxies.chronology import ChronologySettings, build_chronology
    from proxies.chronology.curves import CalibrationCurve

    core = load_core(_write_core(tmp_path / "PB-1", _profile_csv()), year=2026)
    cal = np.arange(-100.0, 20001.0, 5.0)
    curve = CalibrationCurve("straight", cal, cal + 50, np.full(cal.size, 15.0))
    result = build_chronology(core, {"atmosphere": curve}, ChronologySettings(lead210_draws=200), 200,
                              np.random.default_rng(3))
    lead = result.dates[result.dates["label"].str.startswith("210Pb")]
    assert len(lead) >= 8 and lead["constraint"].all() and (lead["kind"] == "calendar").all()
    # sample k sits at t = 10 k + 0.5 yr before 2020 CE: the model follows the 210Pb ages
    t, _, _ = _constant_flux_profile()
    for depth in (2.0, 5.0):
        expected = 1950 - 2020 + t[int(depth) * 10]
        assert np.median(result.age_at([depth])[0]) == pytest.approx(expected, abs=6)
