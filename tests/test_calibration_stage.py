"""The calibration stage end to end with small stand-ins for Core and ChronologyResult,
its settings, and the auxiliary readers."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from calibration_simulation import gaussian_response_training, simulate_species
from proxies.calibration import (CalibrationSettings, InstrumentalSeries, TrainingSet,
                                 TrainingSpec, calibrate_core, fit_transfer_function)
from proxies.calibration.equations import mgca_from_temperature_anand2003
from proxies.calibration.settings import InstrumentalSpec
from proxies.cores import EventLayer
from proxies.cores.model import NON_PROXY_COLUMNS
from proxies.problems import InputError

M = 64
DEMO_CORE = Path(__file__).resolve().parents[1] / "demo_cores" / "cores" / "TEL-07"


@dataclass
class StandInCore:
    """Duck-typed stand-in for proxies.cores.Core (only what calibration reads)."""

    id: str
    samples: pd.DataFrame
    counts: pd.DataFrame | None = None
    collected_ce: int = 2010
    event_layers: tuple = ()

    @property
    def taxa(self):
        return () if self.counts is None else tuple(
            c for c in self.counts.columns if c not in NON_PROXY_COLUMNS)


@dataclass
class StandInChronology:
    """Linear age-depth model: age = top + rate * depth + member offset [cal BP]."""

    offsets: np.ndarray
    rate: float = 1.0
    top: float = -60.0

    def age_at(self, depth_cm):
        depth = np.asarray(depth_cm, dtype=float)
        return self.top + self.rate * depth[:, None] + self.offsets[None, :]


def settings(**tables):
    return CalibrationSettings.from_mapping(tables, "run.toml")


# --------------------------------------------------------------------------- equations
def test_equation_record_and_tables():
    """A published equation gives an (n, M) ensemble centred on the inverse equation
    (Anand et al. 2003), a skill row naming method, equation and reference, and summaries."""
    temps = np.array([5.0, 12.0, 20.0, np.nan])
    samples = pd.DataFrame({"depth_cm": [1.0, 2.0, 3.0, 4.0],
                            "mgca_mmol_mol": mgca_from_temperature_anand2003(temps),
                            "mgca_mmol_mol_error": 0.02, "source_row": [2, 3, 4, 5]})
    core = StandInCore("EQ-1", samples)
    cfg = settings(mgca_mmol_mol={"method": "equation", "equation": "mgca_anand2003"})
    result = calibrate_core(core, None, cfg, {}, {}, 4000, np.random.default_rng(1))
    (record,) = result.records
    assert record.values.shape == (3, 4000) and record.method == "equation"
    np.testing.assert_allclose(np.median(record.values, axis=1), temps[:3], atol=0.15)
    row = result.skill.iloc[0]
    assert row["detail"] == "mgca_anand2003" and "Anand" in row["reference"]
    assert row["calibration_error"] == 1.2
    assert list(result.samples["source_row"]) == [2, 3, 4]
    assert np.all(result.samples["value_q025"] < result.samples["value_median"])


def test_user_defined_linear_and_exponential():
    """User-defined forms invert exactly without errors: proxy = 2 T + 1 and
    proxy = 0.5 exp(0.1 T)."""
    t = np.array([0.0, 10.0, 20.0])
    samples = pd.DataFrame({"depth_cm": [1.0, 2.0, 3.0], "a": 2 * t + 1,
                            "b": 0.5 * np.exp(0.1 * t)})
    cfg = settings(a={"method": "linear", "slope": 2, "intercept": 1, "variable": "t"},
                   b={"method": "exponential", "prefactor": 0.5, "exponent": 0.1,
                      "variable": "t", "units": "degC"})
    result = calibrate_core(StandInCore("U-1", samples), None, cfg, {}, {}, 8,
                            np.random.default_rng(0))
    for record in result.records:
        np.testing.assert_allclose(record.values, np.repeat(t[:, None], 8, axis=1), atol=1e-9)


def test_same_seed_same_result():
    samples = pd.DataFrame({"depth_cm": [1.0, 2.0], "uk37": [0.4, 0.5]})
    cfg = settings(uk37={"method": "equation", "equation": "uk37_mueller1998"})
    a = calibrate_core(StandInCore("R", samples), None, cfg, {}, {}, 10, np.random.default_rng(3))
    b = calibrate_core(StandInCore("R", samples), None, cfg, {}, {}, 10, np.random.default_rng(3))
    np.testing.assert_array_equal(a.records[0].values, b.records[0].values)


# --------------------------------------------------------------------------- overlap
def _overlap_core(rng, skill=True, n=60):
    """Annual samples 1-cm thick; depth d covers 1950 - (top + d +- 0.5) CE."""
    years = np.arange(1850, 2011)
    climate = 10 + 2 * np.sin(2 * np.pi * years / 25) + rng.normal(0, 0.2, years.size)
    series = InstrumentalSeries("station", "air_temperature", "degC", years, climate)
    depth = np.arange(n) + 0.5
    year_mid = 1950 - (-60.0 + depth)
    true = np.interp(year_mid, years, climate)
    proxy = 1.5 + 1.2 * true + rng.normal(0, 0.2, n)
    if not skill:  # the relation flips sign between the two halves: not stable in time
        proxy[n // 2:] = 25.5 - 1.2 * true[n // 2:] + rng.normal(0, 0.2, n - n // 2)
    samples = pd.DataFrame({"depth_cm": depth, "thickness_cm": 1.0, "bsi": proxy})
    return StandInCore("OV-1", samples), series, true


def test_overlap_uses_age_path_of_each_member():
    """Member m uses age path m and no member is dropped: with age offsets of 0-120 yr every
    member keeps its own (partial) overlap and recovers the climate; members whose ages put
    the whole core before the instrumental period (+500 yr) cannot be fitted, and the record
    is refused with their number rather than silently calibrated on the others."""
    rng = np.random.default_rng(7)
    core, series, true = _overlap_core(rng)
    chron = StandInChronology(np.linspace(0.0, 120.0, M))
    cfg = settings(bsi={"method": "overlap", "series": "station"})
    result = calibrate_core(core, chron, cfg, {}, {"station": series}, M, rng)
    (record,) = result.records
    assert record.values.shape == (60, M) and np.all(np.isfinite(record.values))
    aligned = record.values[:, 0]   # member 0 has the true ages
    assert np.sqrt(np.mean((aligned - true) ** 2)) < 0.6
    skill = result.skill.set_index("period")
    assert skill.loc["full", "n_members"] == M and skill.loc["full", "n_members_failed"] == 0
    assert (skill.loc[["verify_early", "verify_late"], ["re", "ce"]] > 0).all(axis=None)
    assert set(skill["status"]) == {"ok"}
    offsets = np.zeros(M)
    offsets[::4] = 500.0
    refused = calibrate_core(core, StandInChronology(offsets), cfg, {}, {"station": series}, M,
                             rng)
    assert refused.records == [] and set(refused.skill["status"]) == {"refused"}
    assert any(f"{M // 4} of {M} age members" in w for w in refused.warnings)


def test_overlap_without_skill_is_refused_or_warned():
    """A relation that is not stable in time fails verification (RE <= 0): refused by
    default (no record, a warning, status
    'refused'); with on_no_skill = "warn" the record is kept with status 'no_skill'."""
    rng = np.random.default_rng(8)
    core, series, _ = _overlap_core(rng, skill=False)
    chron = StandInChronology(np.zeros(M))
    refuse = settings(bsi={"method": "overlap", "series": "station"})
    result = calibrate_core(core, chron, refuse, {}, {"station": series}, M, rng)
    assert result.records == []
    assert set(result.skill["status"]) == {"refused"}
    assert any("no skill" in w and "NOT calibrated" in w for w in result.warnings)
    warn = settings(bsi={"method": "overlap", "series": "station", "on_no_skill": "warn"})
    result = calibrate_core(core, chron, warn, {}, {"station": series}, M, rng)
    assert len(result.records) == 1 and set(result.skill["status"]) == {"no_skill"}
    assert any("no skill" in w for w in result.warnings)


# --------------------------------------------------------------------------- transfer
@pytest.fixture(scope="module")
def training_and_fossil():
    rng = np.random.default_rng(31)
    species = simulate_species(30, rng)
    x, y, _ = gaussian_response_training(120, 30, rng, 400, 1.0, species=species)
    taxa = pd.DataFrame(np.round(x * 4), columns=[f"t{k:02d}" for k in range(30)])
    training = TrainingSet("lakes", taxa, y, "july_temperature", "degC",
                           latitude=rng.uniform(60, 65, 120), longitude=rng.uniform(10, 15, 120))
    xf, yf, _ = gaussian_response_training(25, 30, rng, 400, 0.0, species=species)
    counts = pd.DataFrame(np.round(xf * 4), columns=taxa.columns)
    counts["exotic"] = 0.0
    counts.loc[0, "exotic"] = counts.loc[0].sum()        # half of sample 0 is an unknown taxon
    counts.loc[1, :] = 0.0
    counts.loc[1, ["t00", "exotic"]] = [5.0, 100.0]       # no analogue at all
    counts.insert(0, "depth_cm", np.arange(25) * 2.0 + 1.0)
    counts["source_row"] = np.arange(25) + 2
    return training, counts, yf


@pytest.mark.parametrize("validation", ["loo", "kfold", "bootstrap", "hblock"])
def test_fit_transfer_function_tables(training_and_fossil, validation):
    """Each validation scheme yields a skill table per number of components with one chosen row
    and a cv table of observed vs predicted."""
    training, _, _ = training_and_fossil
    spec = TrainingSpec.from_mapping("lakes", {
        "file": "x.csv", "target": "t", "validation": validation, "bootstrap_cycles": 50,
        "hblock_km": 50.0, "latitude_column": "lat", "longitude_column": "lon"}, "run.toml")
    fitted = fit_transfer_function(training, spec, np.random.default_rng(2))
    perf = fitted.skill
    assert list(perf["n_components"]) == [1, 2, 3] and perf["chosen"].sum() == 1
    assert fitted.n_components == int(perf.loc[perf["chosen"], "n_components"].iloc[0])
    assert set(fitted.cv.columns) >= {"observed", "predicted", "n_components", "residual",
                                      "predicted_c1", "predicted_c3"}
    assert len(fitted.cv) == 120
    chosen = fitted.cv[f"predicted_c{fitted.n_components}"]
    np.testing.assert_array_equal(fitted.cv["predicted"], chosen)
    rmse = np.sqrt(np.mean(fitted.cv["residual"] ** 2))
    if validation != "bootstrap":  # bootstrap RMSEP is sqrt(s1^2 + s2^2) instead
        assert perf.loc[perf["chosen"], "rmsep"].iloc[0] == pytest.approx(rmse)
    assert 0.5 < fitted.rmsep < 3.0


def test_transfer_calibration_and_diagnostics(training_and_fossil):
    """Fossil counts are reconstructed near their true values; unknown taxa and the
    sample without analogues are reported in the diagnostics and warnings."""
    training, counts, truth = training_and_fossil
    spec = TrainingSpec.from_mapping("lakes", {"file": "x.csv", "target": "t",
                                               "bootstrap_cycles": 100}, "run.toml")
    fitted = fit_transfer_function(training, spec, np.random.default_rng(4))
    core = StandInCore("TF-1", pd.DataFrame({"depth_cm": [0.5]}), counts)
    cfg = settings(counts={"method": "transfer", "training": "lakes"})
    result = calibrate_core(core, None, cfg, {"lakes": fitted}, {}, M, np.random.default_rng(5))
    (record,) = result.records
    assert record.values.shape == (25, M) and record.variable == "july_temperature"
    med = np.median(record.values, axis=1)
    assert np.sqrt(np.mean((med[2:] - truth[2:]) ** 2)) < 1.5
    diag = result.diagnostics.set_index("source_row")
    assert diag.loc[2, "missing_taxa_percent"] == pytest.approx(50.0, abs=1.0)
    assert diag.loc[3, "analogue_quality"] == "none"
    assert (diag.loc[4:, "n_missing_taxa"] == 0).all()
    assert any("no close modern analogue" in w for w in result.warnings)
    assert any("absent from training set" in w for w in result.warnings)
    assert result.skill.iloc[0]["n_components"] == fitted.n_components


def test_training_filter_problems_name_the_file(training_and_fossil):
    training, _, _ = training_and_fossil
    spec = TrainingSpec.from_mapping("lakes", {"file": "lakes.csv", "target": "t",
                                               "min_max_percent": 99.0}, "run.toml")
    with pytest.raises(InputError, match="lakes.csv.*rare-taxa filter"):
        fit_transfer_function(training, spec, np.random.default_rng(0))


# --------------------------------------------------------------------------- settings
def test_settings_errors_name_file_and_key():
    with pytest.raises(InputError) as err:
        settings(uk37={"method": "equation", "equation": "nope", "colour": 1},
                 counts={"method": "equation", "equation": "uk37_mueller1998"},
                 bsi={"method": "overlap"}, d18o={"method": "transfer", "training": "x"})
    located = {(p.file, p.column) for p in err.value.problems}
    for section, key in (("uk37", "equation"), ("uk37", "colour"), ("counts", "method"),
                         ("bsi", "series"), ("d18o", "method")):
        assert (f"run.toml [calibration.{section}]", key) in located
    with pytest.raises(InputError, match="hblock_km"):
        TrainingSpec.from_mapping("a", {"file": "f", "target": "t", "validation": "hblock"},
                                  "run.toml")
    with pytest.raises(InputError, match="value_column"):
        InstrumentalSpec.from_mapping("s", {"file": "f"}, "run.toml")
    with pytest.raises(InputError, match="must be a number"):
        settings(a={"method": "linear", "slope": "steep", "intercept": 0, "variable": "t"})


def test_settings_accept_full_tables():
    cfg = settings(
        d18o_permil={"method": "equation", "equation": "d18o_shackleton1974",
                     "seawater_d18o_vsmow": 0.5, "seawater_d18o_error": 0.1,
                     "residual_error": 0.8},
        bsi={"method": "overlap", "series": "s", "fit": "errors_in_variables",
             "error_ratio": 2.0, "min_coverage": 0.8, "min_pairs": 10, "on_no_skill": "warn"},
        counts={"method": "transfer", "training": "lakes", "variable": "t", "units": "degC"})
    assert cfg.for_column("bsi").fit == "errors_in_variables"
    assert cfg.for_column("d18o_permil").seawater_d18o_vsmow == 0.5
    assert cfg.training_names == ("lakes",) and cfg.series_names == ("s",)
    assert CalibrationSettings.from_mapping(None, "run.toml").proxies == ()


def test_d18o_equation_uses_seawater_setting():
    """Shackleton (1974) with seawater d18O from the config: calcite -0.27 + 0.5 permil VPDB
    with seawater +0.5 permil VSMOW is 16.9 degC (equal VPDB values)."""
    samples = pd.DataFrame({"depth_cm": [1.0], "d18o_permil": [0.23]})
    cfg = settings(d18o_permil={"method": "equation", "equation": "d18o_shackleton1974",
                                "seawater_d18o_vsmow": 0.5, "residual_error": 0.0})
    result = calibrate_core(StandInCore("D", samples), None, cfg, {}, {}, 4,
                            np.random.default_rng(0))
    np.testing.assert_allclose(result.records[0].values, 16.9)


# --------------------------------------------------------------------------- readers
def test_auxiliary_readers(tmp_path):
    from pipelines.auxiliary import read_instrumental, read_training_set
    path = tmp_path / "train.csv"
    path.write_text("site,temp,a,b,c\nL1,10.5,10,5,0\nL2,12.0,0,8,3\nL3,14.2,1,1,9\n")
    spec = TrainingSpec.from_mapping("t", {"file": "train.csv", "target": "temp",
                                           "id_column": "site", "units": "degC"}, "run.toml")
    ts = read_training_set(path, spec)
    assert list(ts.taxa.columns) == ["a", "b", "c"] and list(ts.ids) == ["L1", "L2", "L3"]
    np.testing.assert_allclose(ts.target, [10.5, 12.0, 14.2])
    path.write_text("site,temp,a,b\nL1,warm,10,5\nL2,12.0,-1,8\n")
    with pytest.raises(InputError) as err:
        read_training_set(path, spec)
    text = str(err.value)
    assert "row 2, column 'temp'" in text and "row 3, column 'a'" in text
    series = tmp_path / "station.csv"
    series.write_text("year_ce,t\n1900,1.0\n1901,\n1902,3.0\n")
    ispec = InstrumentalSpec.from_mapping("s", {"file": "station.csv", "value_column": "t"},
                                          "run.toml")
    inst = read_instrumental(series, ispec)
    assert list(inst.year_ce) == [1900, 1901, 1902] and np.isnan(inst.values[1])
    series.write_text("year_ce,t\n1900,1.0\n1900.5,2.0\n")
    with pytest.raises(InputError, match="row 3"):
        read_instrumental(series, ispec)


# --------------------------------------------------------------------------- event layers
def test_samples_inside_event_layers_are_left_out_unless_kept():
    """A sample inside an event layer (an instantaneous deposit) is not calibrated by
    default; event_layer_samples = "keep" uses it."""
    samples = pd.DataFrame({"depth_cm": [1.0, 5.0, 9.0], "uk37": [0.4, 0.5, 0.6],
                            "source_row": [2, 3, 4]})
    core = StandInCore("EV-1", samples, event_layers=(EventLayer(4.0, 6.0, "turbidite"),))
    table = {"method": "equation", "equation": "uk37_mueller1998"}
    left_out = calibrate_core(core, None, settings(uk37=table), {}, {}, 8,
                              np.random.default_rng(0))
    assert list(left_out.samples["depth_cm"]) == [1.0, 9.0]
    assert any("inside event layers" in w for w in left_out.warnings)
    kept = calibrate_core(core, None, settings(uk37={**table, "event_layer_samples": "keep"}),
                          {}, {}, 8, np.random.default_rng(0))
    assert list(kept.samples["depth_cm"]) == [1.0, 5.0, 9.0]


def test_check_warns_about_samples_in_event_layers(tmp_path):
    """downcore check names file, row and column of a sample inside an event layer, as a
    warning (the exit code stays 0)."""
    import shutil

    from click.testing import CliRunner

    from pipelines.cli.check import command
    folder = tmp_path / "TEL-07"
    shutil.copytree(DEMO_CORE, folder)
    first = pd.read_excel(folder / "samples.xlsx")["depth_cm"].iloc[0]
    with open(folder / "core.toml", "a", encoding="utf-8") as handle:
        handle.write(f"\n[[event_layers]]\ntop = {first - 0.1}\nbottom = {first + 0.1}\n"
                     'kind = "turbidite"\n')
    result = CliRunner().invoke(command, [str(folder)])
    assert result.exit_code == 0, result.output
    assert "warning: samples.xlsx, row 2, column 'depth_cm'" in result.output
