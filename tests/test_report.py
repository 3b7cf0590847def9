"""The run report: content of the figures, self-containment of the HTML, determinism and
tolerance of incomplete runs. Uses the synthetic run folder of ``run_folder_factory``."""

from __future__ import annotations

import hashlib
import json
import re
import xml.etree.ElementTree as ET

import matplotlib.colors as mcolors
import numpy as np
import pandas as pd
import pytest
from scipy import stats

from pipelines.report import style, write_run_report
from pipelines.report.figures_calibration import analogue_figure, cv_statistics
from pipelines.report.figures_chronology import (OUTLIER_LINE, deposition_time_figure,
                                                 age_depth_figure, outlier_figure)
from pipelines.report.figures_events import event_figure
from pipelines.report.style import without_embedded_pictures
from pipelines.report.figures_reconstruction import band_pairs, reconstruction_figure
from pipelines.report.rundata import _warning_list, read_run, reconstruction_series
from pipelines.runfolder import atomic_write_parquet
from run_folder_factory import make_run_folder


@pytest.fixture(scope="module")
def run_dir(tmp_path_factory):
    return make_run_folder(tmp_path_factory.mktemp("run") / "run-a")


@pytest.fixture(scope="module")
def report_text(run_dir):
    return write_run_report(run_dir).read_text(encoding="utf-8")


def _core(run_dir, core_id):
    return next(c for c in read_run(run_dir).cores if c.core_id == core_id)


# --- the page ------------------------------------------------------------------------------

def test_report_has_figures_and_no_outside_reference(report_text):
    """At least four figures, all inline SVG; no address of another site anywhere in the
    text (no 'http', no '//'), no src attribute, only in-page anchors and relative links to
    the figure files."""
    assert report_text.count('<figure class="plot"') >= 4
    assert report_text.count("<svg") == report_text.count('<figure class="plot"')
    text = without_embedded_pictures(report_text)
    lowered = text.lower()
    assert "http" not in lowered and "//" not in text
    assert " src=" not in lowered and "url(" not in re.sub(r"url\(#[^)]+\)", "", lowered)
    assert "<script" not in lowered and "<link" not in lowered
    for href in re.findall(r'href="([^"]*)"', text):
        assert (href.startswith("#") or href == "data:image/png;base64,"
                or re.fullmatch(r"figures/[\w.-]+\.(png|svg)", href)), href


def test_report_ids_are_unique_and_internal_links_resolve(report_text):
    """Figure ids are prefixed per figure, so no id repeats on the page; every '#x' link and
    url(#x) has its target."""
    ids = re.findall(r'\bid="([^"]+)"', report_text)
    assert len(ids) == len(set(ids))
    targets = set(ids)
    for ref in re.findall(r'(?:href="#|url\(#)([^")]+)', report_text):
        assert ref in targets, ref


def test_summary_lists_every_core_and_the_failure_reason(report_text):
    for core_id in ("TARN-2", "FJORD-7", "BOG-3", "MIRE-9"):
        assert f'id="core-{core_id.lower()}"' in report_text
    assert "must be &gt; 0" in report_text  # the failed core's reason, escaped
    assert "failed" in report_text and "No results were written for this core." in report_text


def test_figures_saved_as_svg_and_png_on_request(run_dir, report_text, tmp_path):
    """Every linked figure exists as a well-formed SVG with a viewBox, drawn once (no PNG by
    default); with ``png=True`` every figure also has a PNG copy (signature checked)."""
    links = re.findall(r'href="(figures/[^"]+)"', report_text)
    assert links and all(link.endswith(".svg") for link in links)
    assert not list((run_dir / "figures").glob("*.png"))
    for link in links:
        root = ET.fromstring((run_dir / link).read_bytes())
        assert root.tag.endswith("svg") and root.get("viewBox")
    copy = make_run_folder(tmp_path / "run-png")
    text = write_run_report(copy, png=True).read_text(encoding="utf-8")
    pngs = re.findall(r'href="(figures/[^"]+\.png)"', text)
    assert len(pngs) == len(links)
    for link in pngs:
        assert (copy / link).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_dense_ensemble_lines_are_rasterised_inside_the_svg(run_dir, report_text):
    """The age-depth figure's ensemble members are one embedded picture, not one vector path
    per member, and text stays text (the figures stay light)."""
    svg = next((run_dir / "figures").glob("*_age_depth.svg")).read_text(encoding="utf-8")
    assert "<image" in svg and "data:image/png;base64" in svg
    assert "<text" in svg


def test_rerun_is_byte_identical(run_dir, report_text):
    """A second report of the same run folder gives identical HTML, PNG and SVG bytes."""
    def digest():
        files = [run_dir / "report.html", *sorted((run_dir / "figures").iterdir())]
        return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in files}

    first = digest()
    assert len(first) > 8
    write_run_report(run_dir)
    assert digest() == first


def test_tolerates_missing_and_broken_tables(tmp_path):
    """A core whose reconstruction table lacks a required column and whose date densities
    are gone still gets a report: the note names the file and column, dates fall back to
    HPD bars, and stale figure files are removed."""
    run = make_run_folder(tmp_path / "run")
    stale = run / "figures" / "TARN-2_reconstruction_sst_mgca_mmol_mol.png"
    stale.parent.mkdir()
    stale.write_bytes(b"from an earlier report")
    recon = pd.read_parquet(run / "TARN-2" / "reconstruction.parquet")
    atomic_write_parquet(run / "TARN-2" / "reconstruction.parquet", recon.drop(columns="value_median"))
    (run / "TARN-2" / "date_densities.parquet").unlink()
    (run / "stack.parquet").unlink()
    text = write_run_report(run).read_text(encoding="utf-8")
    assert "reconstruction.parquet lacks column(s) value_median" in text
    assert not stale.exists()
    assert "Regional composite" not in text
    core = _core(run, "TARN-2")
    fig = age_depth_figure(core)
    thick = [ln for ln in fig.axes[0].lines if ln.get_linewidth() == 3.0]
    assert len(thick) == len(core.table("dates"))  # one 95 % HPD bar per date


def test_run_folder_without_summary_or_manifest(tmp_path):
    """Only a core folder with a chronology: the report says what is missing."""
    run = make_run_folder(tmp_path / "run")
    (run / "summary.parquet").unlink()
    (run / "manifest.json").unlink()
    text = write_run_report(run).read_text(encoding="utf-8")
    assert "manifest.json is missing" in text
    assert "not listed in summary.parquet" in text
    assert text.count('<figure class="plot"') >= 4


def test_run_in_progress_without_manifest_is_not_flagged(tmp_path):
    """The run flow writes the report before the manifest (which hashes the report): while
    the in-progress marker is there, a missing manifest is expected and not reported."""
    from pipelines.runfolder import IN_PROGRESS_MARKER

    run = make_run_folder(tmp_path / "run")
    (run / "manifest.json").unlink()
    (run / IN_PROGRESS_MARKER).write_text("pid 1\n")
    assert read_run(run).notes == []


# --- figure content --------------------------------------------------------------------------

def test_age_depth_figure_draws_the_chronology_and_every_density(run_dir):
    """The median line is the chronology's age_median; one density glyph per date; depth
    increases downwards."""
    core = _core(run_dir, "TARN-2")
    fig = age_depth_figure(core)
    ax = fig.axes[0]
    chron = core.table("chronology")
    medians = [ln for ln in ax.lines if ln.get_linewidth() == 1.4]
    assert len(medians) == 1
    np.testing.assert_array_equal(medians[0].get_xdata(), chron["age_median"].to_numpy())
    glyphs = [c for c in ax.collections if c.get_zorder() == 4]
    assert len(glyphs) == len(core.table("dates"))
    hatched = [c for c in glyphs if c.get_hatch()]
    assert len(hatched) == int((core.table("dates")["outlier_prob"] >= OUTLIER_LINE).sum())
    assert ax.get_ylim()[0] > ax.get_ylim()[1]


def test_deposition_time_is_the_ensemble_median_of_age_differences(run_dir):
    """Median line = median over members of diff(age)/diff(depth), computed here directly,
    drawn against depth on the vertical axis."""
    core = _core(run_dir, "TARN-2")
    ens = core.table("age_ensemble")
    members = ens.filter(regex=r"^m\d+$").to_numpy(float)
    expected = np.median(np.diff(members, axis=0) / np.diff(ens["depth_cm"].to_numpy())[:, None], axis=1)
    fig = deposition_time_figure(core)
    line = next(ln for ln in fig.axes[0].lines if ln.get_label() == "median of members")
    np.testing.assert_allclose(line.get_xdata(), expected, rtol=1e-12)
    assert fig.axes[0].get_xscale() == "log" and fig.axes[0].get_ylim()[0] > fig.axes[0].get_ylim()[1]


def test_outlier_figure_bars_are_the_probabilities(run_dir):
    core = _core(run_dir, "TARN-2")
    fig = outlier_figure(core)
    bars = sorted(fig.axes[0].patches, key=lambda p: p.get_y())
    dates = core.table("dates").sort_values("depth_cm")
    np.testing.assert_allclose([b.get_width() for b in bars], dates["outlier_prob"].to_numpy())
    assert [bool(b.get_hatch()) for b in bars] == list(dates["outlier_prob"] >= OUTLIER_LINE)


def test_cv_statistics_match_scipy():
    """RMSEP from its definition and r² from scipy.stats.pearsonr (independent)."""
    rng = np.random.default_rng(3)
    obs = rng.uniform(0, 20, 60)
    pred = obs + rng.normal(0, 1.5, 60)
    got = cv_statistics(pd.DataFrame({"observed": obs, "predicted": pred}))
    assert got["rmsep"] == pytest.approx(np.sqrt(np.mean((pred - obs) ** 2)), rel=1e-12)
    assert got["r2"] == pytest.approx(stats.pearsonr(obs, pred)[0] ** 2, rel=1e-12)
    assert got["mean_bias"] == pytest.approx(np.mean(pred - obs), rel=1e-12)


def test_analogue_figure_plots_distances_against_median_age(run_dir):
    core = _core(run_dir, "TARN-2")
    fig = analogue_figure(core)
    ax = fig.axes[0]
    assert ax.get_ylabel() == "nearest analogue distance"
    diag = core.table("calibration_diagnostics")
    chron = core.table("chronology")
    expected_age = np.interp(diag["depth_cm"], chron["depth_cm"], chron["age_median"])
    line = ax.lines[0]
    order = np.argsort(expected_age)
    np.testing.assert_allclose(line.get_xdata(), expected_age[order])
    np.testing.assert_allclose(line.get_ydata(), diag["nearest_analogue_distance"].to_numpy()[order])
    levels = sorted(ln.get_ydata()[0] for ln in ax.lines[1:])
    assert levels == [0.2, 0.45]  # the two thresholds of the table
    assert ax.xaxis_inverted()  # older ages to the left


def test_analogue_panels_are_the_measures_the_schema_declares(run_dir):
    """The panels are the declared ``measure`` columns of calibration_diagnostics, in the
    declaration's order, and the lines its ``limit`` columns: no guessing from names."""
    from pipelines.outputs_schema import table

    declared = table("calibration_diagnostics").columns
    measures = [c.name for c in declared if c.role == "measure"]
    limits = [c.name for c in declared if c.role == "limit"]
    assert measures == ["nearest_analogue_distance", "missing_taxa_percent", "n_missing_taxa"]
    assert limits == ["good_analogue_limit", "no_analogue_limit"]
    assert all(c.dtype in ("float", "int") for c in declared if c.role)
    fig = analogue_figure(_core(run_dir, "TARN-2"))
    assert [ax.get_ylabel() for ax in fig.axes] == [m.replace("_", " ") for m in measures]


def test_reconstruction_figure_bands_and_warm_cold_split(run_dir):
    core = _core(run_dir, "TARN-2")
    series = reconstruction_series(core.table("reconstruction"))[0]
    assert [lvl for lvl, _, _ in band_pairs(series.rows, "value")] == [0.95, 0.68]
    fig = reconstruction_figure(core, series)
    top, anomaly = fig.axes[0], fig.axes[1]
    np.testing.assert_array_equal(top.lines[0].get_ydata(), series.rows["value_median"].to_numpy())
    warm = [c for c in anomaly.collections if len(c.get_facecolor())
            and np.allclose(c.get_facecolor()[0][:3], mcolors.to_rgb(style.WARM))]
    assert len(warm) == 1
    med = series.rows["anomaly_median"].to_numpy()
    ages = series.rows["age_cal_bp"].to_numpy()
    verts = np.vstack([p.vertices for p in warm[0].get_paths()])
    inside = (verts[:, 0] >= ages[med > 0].min() - 50) & (verts[:, 0] <= ages[med > 0].max() + 50)
    assert inside.all()  # warm fill only where the median anomaly is above zero
    assert series.reference_window == (0.0, 1000.0)


def test_event_figure_one_lane_per_event(run_dir):
    core = _core(run_dir, "TARN-2")
    fig = event_figure(core, "sst")
    lanes = fig.axes[-1]
    events = core.table("events")
    bars = sorted(lanes.patches, key=lambda p: p.get_y())
    assert len(bars) == len(events)
    for bar, (_, row) in zip(bars, events.iterrows()):
        assert bar.get_x() == pytest.approx(row["onset_q025"])
        assert bar.get_x() + bar.get_width() == pytest.approx(row["onset_q975"])
        assert bool(bar.get_hatch()) == (not row["significant"])


def test_palette_survives_greyscale():
    """Series that a figure tells apart differ in lightness, not only in hue (relative
    luminance, WCAG 2.x definition)."""
    def luminance(colour):
        rgb = np.array(mcolors.to_rgb(colour))
        lin = np.where(rgb <= 0.04045, rgb / 12.92, ((rgb + 0.055) / 1.055) ** 2.4)
        return float(lin @ [0.2126, 0.7152, 0.0722])

    assert luminance(style.WARM) < luminance(style.COOL) - 0.3
    assert luminance(style.BAND_DARK) < luminance(style.BAND_LIGHT) - 0.2
    assert luminance(style.INK) < luminance(style.BAND_DARK) - 0.3
    linestyles = [s[1] for s in style.SERIES_STYLES]
    assert len(set(map(str, linestyles))) == len(linestyles)


# --- reading helpers --------------------------------------------------------------------------

def test_hpd_ranges_come_from_the_numeric_range_table():
    """Ranges are read as numbers from date_ranges.parquet, by label and level, in the row
    order of dates.parquet; a date without a range row has none (nothing is parsed)."""
    from pipelines.report.rundata import CoreData

    dates = pd.DataFrame({"label": ["b", "a", "c"], "depth_cm": [1.0, 2.0, 3.0]})
    ranges = pd.DataFrame({"label": ["a", "a", "a", "b"], "level": [0.683, 0.954, 0.954, 0.954],
                           "young_cal_bp": [4900.0, 4870.0, 5150.0, 100.0],
                           "old_cal_bp": [5100.0, 5120.0, 5200.0, 300.0],
                           "probability": [0.683, 0.91, 0.044, 0.954]})
    core = CoreData(core_id="X", tables={"dates": dates, "date_ranges": ranges})
    assert core.hpd_ranges(0.954) == [[(100.0, 300.0)], [(4870.0, 5120.0), (5150.0, 5200.0)], []]
    assert core.hpd_ranges(0.683) == [[], [(4900.0, 5100.0)], []]


@pytest.mark.parametrize("cell, expected", [
    ("first | second", ["first", "second"]), ("only one", ["only one"]), ("", []), (None, []),
])
def test_warning_cells(cell, expected):
    assert _warning_list(cell) == expected


def test_a_core_shows_only_the_training_sets_its_calibration_used():
    """A core calibrated by equations (empty diagnostics table) shows no training-set figure;
    a core whose skill table names the training set shows that one."""
    import pandas as pd

    from pipelines.report.figures_calibration import training_sets_of
    from pipelines.report.rundata import CoreData, TrainingData

    training = [TrainingData("midges", None, None), TrainingData("diatoms", None, None)]
    marine = CoreData(core_id="M-1", status="ok", tables={
        "calibration": pd.DataFrame({"proxy": ["uk37"], "method": ["equation"], "detail": ["uk37_mueller1998"]}),
        "calibration_diagnostics": pd.DataFrame({"depth_cm": pd.Series([], dtype=float)})})
    lake = CoreData(core_id="L-1", status="ok", tables={
        "calibration": pd.DataFrame({"proxy": ["counts"], "method": ["transfer"], "detail": ["midges"]})})
    assert training_sets_of(marine, training) == []
    assert [t.name for t in training_sets_of(lake, training)] == ["midges"]


# --- printed numbers and tables (what a lab asked for) --------------------------------------

def test_ranges_probabilities_and_headers_print_as_a_lab_reads_them():
    """Negative ranges with true minus signs and "to"; tiny probabilities as "< 0.001";
    unit endings of column names as units in headers."""
    from pipelines.report import html as H

    assert H.range_text(-79.2, -58.6) == "\u221279 to \u221259"
    assert H.range_text(5048, 5201) == "5048 to 5201"
    assert H.probability_text(3e-7) == "< 0.001" and H.probability_text(0.004) == "0.004"
    assert H.probability_text(0.42) == "0.42" and H.probability_text(float("nan")) == "n/a"
    assert H.header_with_units("depth_cm") == "depth [cm]"
    assert H.header_with_units("deposition_time_yr_cm") == "deposition time [yr/cm]"
    assert H.header_with_units("onset_median_cal_bp") == "onset median [cal BP]"
    assert H.header_with_units("rmsep") == "rmsep"


def test_wide_tables_scroll_in_their_own_box(report_text):
    """Every data table sits in a box that scrolls sideways (CSS overflow-x)."""
    assert ".table-box { max-width: 100%; overflow-x: auto;" in report_text
    tables = report_text.count('<table class="data"')
    assert tables and report_text.count('<div class="table-box"><table class="data"') == tables


def test_all_negligible_outlier_probabilities_collapse_to_one_line(tmp_path):
    """A core whose dates all have outlier probabilities below 0.001 gets one line of text
    instead of a chart of empty bars; the dates table prints them as "< 0.001"."""
    run = make_run_folder(tmp_path / "run")
    path = run / "TARN-2" / "dates.parquet"
    dates = pd.read_parquet(path)
    dates["outlier_prob"] = 1e-5
    atomic_write_parquet(path, dates)
    text = write_run_report(run).read_text(encoding="utf-8")
    assert "below 0.001 for every date (no chart drawn)" in text
    assert not (run / "figures" / "TARN-2_outliers.svg").exists()
    assert "&lt; 0.001" in text


def test_tables_the_report_does_not_draw_on_are_checked_not_read(tmp_path):
    """The reconstruction's members (the largest table) are used by neither the report nor the
    netCDF: read_run checks their schema only, and a damaged file is still named."""
    run = make_run_folder(tmp_path / "run")
    core = next(c for c in read_run(run).cores if c.core_id == "TARN-2")
    assert "reconstruction_ensemble" not in core.tables and not core.notes
    (run / "TARN-2" / "reconstruction_ensemble.parquet").write_bytes(b"PAR1 truncated")
    core = next(c for c in read_run(run).cores if c.core_id == "TARN-2")
    assert any(n.startswith("reconstruction_ensemble.parquet could not be read") for n in core.notes)
