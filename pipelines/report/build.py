"""Write a run's HTML report and its figures from the files in the run folder.

``write_run_report(run_dir)`` reads the run folder (never the inputs), draws every figure
the tables allow (SVG under ``figures/``), and writes ``report.html`` atomically. It
can be called again on a finished run (``downcore report RUN``) and gives the same bytes.
Each figure is drawn once, as SVG; PNG copies are drawn on request (``png=True``,
``downcore report RUN --png``).
"""

from __future__ import annotations

import pathlib
from typing import Callable

import pandas as pd

from pipelines.report import html as H
from pipelines.report import style
from pipelines.report.drawing import DrawnFigures, FigureClaims, ReportHelper, own_helper
from pipelines.report.figures_calibration import (analogue_figure, cv_scatter_figure,
                                                  cv_statistics, training_sets_of)
from pipelines.report.figures_chronology import (NEGLIGIBLE_PROBABILITY, age_depth_figure,
                                                 all_outlier_probabilities_negligible,
                                                 deposition_time_figure, hyperparameter_figure,
                                                 outlier_figure)
from pipelines.report.figures_events import event_figure, event_variables, lead_lag_figure
from pipelines.report.figures_reconstruction import reconstruction_figure, stack_figure
from pipelines.report.rundata import (CoreData, RunData, downcore_version, read_core, read_run,
                                      reconstruction_series)
from pipelines.runfolder import atomic_write_text

__all__ = ["write_run_report", "write_report_and_exports", "write_report_with_exports", "draw_claimed",
           "REPORT_NAME"]

REPORT_NAME = "report.html"


class _Figures:
    """Numbers, saves and renders the figures of one report (``drawn``: figures drawn
    beforehand, by key, see :mod:`pipelines.report.drawing`; any other is drawn here)."""

    def __init__(self, run_dir: pathlib.Path, png: bool = False,
                 drawn: dict[str, style.SavedFigure | None] | None = None):
        self.run_dir = run_dir
        self.png = png
        self.drawn = drawn or {}
        self.count = 0
        self.written: set[str] = set()

    def add(self, make: Callable[[], object], key: str, title: str, caption: str) -> str:
        if key in self.drawn:
            saved = self.drawn[key]
        else:
            fig = make()
            saved = None if fig is None else style.save_figure(fig, self.run_dir, key, title, caption, png=self.png)
        if saved is None:
            return ""
        self.written.update(pathlib.Path(f).name for f in (saved.png, saved.svg) if f)
        self.count += 1
        return H.figure_html(saved, self.count)

    def remove_stale(self) -> None:
        folder = self.run_dir / "figures"
        if not folder.is_dir():
            return
        for path in folder.iterdir():
            if path.suffix in (".png", ".svg") and path.name not in self.written:
                path.unlink()


class _Claiming:
    """Stands in for :class:`_Figures` in a drawing pass: draws the figures it can claim."""

    def __init__(self, figures: DrawnFigures):
        self.figures = figures

    def add(self, make: Callable[[], object], key: str, title: str, caption: str) -> str:
        self.figures.draw(make, key, title, caption)
        return ""


def _manifest_items(run: RunData) -> list[tuple[str, object]]:
    m = run.manifest
    resolved = (m.get("config") or {}).get("resolved") or {}
    run_cfg = resolved.get("run") or {}
    seeds = m.get("seeds") or {}
    versions = m.get("versions") or {}
    items: list[tuple[str, object]] = [
        ("run folder", run.folder.name),
        ("started (UTC)", m.get("started_utc")),
        ("finished (UTC)", m.get("created_utc")),
        ("run seed", seeds.get("run_seed", run_cfg.get("seed"))),
        ("ensemble members", run_cfg.get("ensemble")),
        ("run config", (m.get("config") or {}).get("path")),
        ("input files", len(m.get("inputs") or []) or None),
        ("downcore version", versions.get("downcore") or downcore_version()),
    ]
    return [(k, v) for k, v in items if v not in (None, "")]


def _status_cell(core: CoreData) -> str:
    if core.ok:
        return '<span class="status ok">✓ ok</span>'
    if core.status.lower() in ("failed", "error"):
        return '<span class="status failed">✗ failed</span>'
    if core.status.lower() == "thin":
        return '<span class="status thin" title="reconstruction empty or mostly empty">◐ thin</span>'
    if core.status.lower() == "dated":
        return '<span class="status dated" title="dated only: nothing calibrated">○ dated only</span>'
    return f'<span class="status">{H.esc(core.status)}</span>'


def _summary_section(run: RunData) -> str:
    rows = []
    for core in run.cores:
        reason = core.reason or (core.warnings[0] if core.warnings else "")
        rows.append(
            f'<tr><td><a href="#core-{H.anchor(core.core_id)}">{H.esc(core.core_id)}</a></td>'
            f"<td>{_status_cell(core)}</td><td>{H.esc(core.stage or '–')}</td>"
            f'<td class="num">{len(core.warnings)}</td>'
            f'<td class="num">{H.esc(H.fmt(core.seconds))}</td><td>{H.esc(reason or "–")}</td></tr>')
    n_ok = sum(c.ok for c in run.cores)
    n_failed = sum(c.status.lower() in ("failed", "error") for c in run.cores)
    n_thin = sum(c.status.lower() == "thin" for c in run.cores)
    n_dated = sum(c.status.lower() == "dated" for c in run.cores)
    shown = n_ok + n_failed + n_thin + n_dated
    lead = (f"{len(run.cores)} core(s): {n_ok} ok, {n_thin} thin (reconstruction mostly empty), "
            f"{n_dated} dated only, {n_failed} failed"
            f"{'' if shown == len(run.cores) else ', others incomplete'}.")
    table = ('<div class="table-box"><table class="data"><thead><tr><th>core</th><th>status</th>'
             "<th>stage reached</th><th>warnings</th><th>seconds</th><th>reason / first warning</th>"
             f"</tr></thead><tbody>{''.join(rows)}</tbody></table></div>")
    body = H.key_value_html(_manifest_items(run)) + f"<p>{H.esc(lead)}</p>" + table
    for note in run.notes:
        body += H.note_html(note, "info")
    return H.section("summary", "Archive summary", body)


def _dates_table(core: CoreData) -> str:
    dates = core.table("dates")
    if dates is None or not len(dates):
        return ""
    shown = pd.DataFrame({"label": dates["label"], "depth [cm]": dates["depth_cm"]})
    for column, header in (("kind", "kind"), ("age", "age"), ("error", "± 1σ")):
        if column in dates.columns:
            shown[header] = dates[column]
    shown["calibrated median [cal BP]"] = dates["cal_median_bp"].round()
    ranges = core.hpd_ranges(0.954)
    if any(ranges):
        shown["95 % HPD [cal BP]"] = ["; ".join(H.range_text(a, b) for a, b in r) or "–" for r in ranges]
    if "outlier_prob" in dates.columns:
        shown["outlier probability"] = [H.probability_text(p) for p in
                                        pd.to_numeric(dates["outlier_prob"], errors="coerce")]
    if "exclude" in dates.columns:
        shown["excluded"] = dates["exclude"]
    return "<h4>Dates</h4>" + H.table_html(shown)


def _chronology_part(core: CoreData, figs: _Figures) -> str:
    cid = core.core_id
    parts = [
        figs.add(lambda: age_depth_figure(core), f"{cid}_age_depth", "Age-depth model",
                 "Median age (solid line) with its 68 % and 95 % ranges and a few ensemble "
                 "members; each date is drawn as its calibrated probability density above its "
                 "depth (or as its 95 % HPD range when densities were not stored). Hatched "
                 "dashed dates are more likely outliers than not; dotted dates were excluded; a "
                 "dash-dot line marks a hiatus with its median gap."),
        figs.add(lambda: deposition_time_figure(core), f"{cid}_deposition_time", "Deposition time",
                 "Years per centimetre between neighbouring depths, over the age ensemble "
                 "(median and 68 %/95 % ranges); the dashed line is the slope of the median "
                 "age. The interval across a hiatus is left out (dash-dot line: its gap is "
                 "written beside it), so its spike does not flatten the rest."),
        figs.add(lambda: outlier_figure(core), f"{cid}_outliers", "Date outlier probability",
                 "Posterior probability that each date is an outlier, in depth order."),
        figs.add(lambda: hyperparameter_figure(core), f"{cid}_accumulation_prior", "Accumulation prior",
                 "Posterior weight of each value of the accumulation model's hyper-parameters (mean "
                 "deposition time, rate variability and, with memory, the persistence of the rate), "
                 "from their exact evidence."),
    ]
    if all_outlier_probabilities_negligible(core.table("dates")):
        parts.append(H.note_html(f"Outlier probability: below {NEGLIGIBLE_PROBABILITY:g} for every "
                                 "date (no chart drawn).", "info"))
    body = "".join(parts)
    if not body:
        return H.note_html("No chronology: this core stopped before its age-depth model.")
    return body + _dates_table(core)


def _training_units(run: RunData, name: str) -> str:
    """The ``units`` of training set ``name`` as the run config gave them, or ``""``."""
    resolved = ((run.manifest.get("config") or {}).get("resolved") or {})
    entry = (resolved.get("training") or {}).get(name) or {}
    return str(entry.get("units") or "") if isinstance(entry, dict) else ""


def _calibration_part(core: CoreData, run: RunData, figs: _Figures) -> str:
    cid = core.core_id
    body = ""
    skill = core.table("calibration")
    if skill is not None and len(skill):
        body += "<h4>Calibration skill</h4>" + H.table_html(skill)
    for training in training_sets_of(core, run.training):
        units = _training_units(run, training.name)
        body += figs.add(lambda t=training, u=units: cv_scatter_figure(t, u), f"{cid}_cv_{training.name}",
                         f"Cross-validation of training set '{training.name}'",
                         "Cross-validated prediction against the observed value of each "
                         "modern sample (left; dashed: 1:1) and the residuals (right).")
        if training.cv is not None:
            stats = cv_statistics(training.cv)
            body += H.key_value_html([(k, v) for k, v in stats.items()])
        if training.skill is not None and len(training.skill):
            body += H.table_html(training.skill)
    body += figs.add(lambda: analogue_figure(core), f"{cid}_analogues",
                     "Analogue quality through time",
                     "Diagnostics of each fossil sample against the training set, at the "
                     "sample's median age; horizontal lines are the thresholds written by the "
                     "calibration stage.")
    if not body:
        return H.note_html("No calibration results for this core.")
    return body


def _reconstruction_part(core: CoreData, figs: _Figures) -> str:
    body = ""
    for series in reconstruction_series(core.table("reconstruction")):
        key = f"{core.core_id}_reconstruction_{series.variable}" + (
            f"_{series.proxy}" if series.proxy else "")
        body += figs.add(lambda s=series: reconstruction_figure(core, s), key,
                         f"Reconstruction: {series.label}",
                         "Top: median and 68 %/95 % ranges on the time grid with the calibrated "
                         "samples at their median ages. Middle: anomalies against the reference "
                         "window (cross-hatched span), dark above and hatched light below it. Bottom: "
                         "samples behind each grid point.")
    return body or H.note_html("No reconstruction for this core.")


def _events_part(core: CoreData, figs: _Figures) -> str:
    body = ""
    for variable in event_variables(core):
        body += figs.add(lambda v=variable: event_figure(core, v),
                         f"{core.core_id}_events_{variable}", f"Events in {variable}",
                         "Top: share of ensemble members in which an event is under way at each "
                         "age. Bottom: each detected event's onset, 95 % range as a bar (solid: "
                         "significant against red-noise surrogates) and median as a diamond.")
    events = core.table("events")
    if events is not None and len(events):
        body += H.table_html(events)
    return body or H.note_html("No event detection results for this core.")


def _core_section(core: CoreData, run: RunData, figs: _Figures) -> str:
    head = H.key_value_html([("status", core.status), ("stage reached", core.stage or None),
                             ("seconds", core.seconds)])
    if core.reason:
        head += H.note_html(f"Reason: {core.reason}")
    if core.warnings:
        head += "<h4>Warnings</h4>" + H.list_html(core.warnings, "warnings")
    for note in core.notes:
        head += H.note_html(note, "info")
    if not core.tables:
        return H.section(f"core-{H.anchor(core.core_id)}", f"Core {core.core_id}",
                         head + H.note_html("No results were written for this core."), "core")
    body = head
    body += H.section(f"core-{H.anchor(core.core_id)}-chronology", "Chronology",
                      _chronology_part(core, figs), level=3)
    if any(core.table(k) is not None for k in ("calibration", "calibrated_samples",
                                               "calibration_diagnostics")):
        body += H.section(f"core-{H.anchor(core.core_id)}-calibration", "Calibration",
                          _calibration_part(core, run, figs), level=3)
    if core.table("reconstruction") is not None:
        body += H.section(f"core-{H.anchor(core.core_id)}-reconstruction", "Reconstruction",
                          _reconstruction_part(core, figs), level=3)
    if core.table("events") is not None or core.table("event_probability") is not None:
        body += H.section(f"core-{H.anchor(core.core_id)}-events", "Events",
                          _events_part(core, figs), level=3)
    return H.section(f"core-{H.anchor(core.core_id)}", f"Core {core.core_id}", body, "core")


def _stack_section(run: RunData, figs: _Figures) -> str:
    if run.stack is None or not len(run.stack):
        return ""
    units = {}
    for core in run.cores:
        for s in reconstruction_series(core.table("reconstruction")):
            units.setdefault(s.variable, s.units)
    body = ""
    for variable in dict.fromkeys(run.stack["variable"].astype(str)):
        body += figs.add(lambda v=variable: stack_figure(run.stack, v, units.get(v, "")),
                         f"stack_{variable}", f"Regional composite: {variable}",
                         "Median and ranges over the ensemble of the composite of all cores "
                         "that reconstruct this variable; lower panel: records contributing.")
    return H.section("composite", "Regional composite", body + _regional_events_part(run)) if body else ""


def _regional_events_part(run: RunData) -> str:
    """Events found in the composite with the regional onset and midpoint (95 % ranges)."""
    from pipelines.outputs_schema import table as output_table

    path = run.folder / output_table("regional_events").path
    events = pd.read_parquet(path) if path.is_file() else None
    if events is None or not len(events):
        return ""
    note = H.note_html("Events found in the composite, with the regional onset and midpoint over the "
                       "composite's members (95 % ranges). The composite's onset is biased old when the "
                       "records' age errors spread their changes; compare the midpoint with one record.")
    return note + H.table_html(events, ["variable", "event_id", "kind", "direction", "onset_median", "onset_q025",
                                        "onset_q975", "midpoint_median", "midpoint_q025", "midpoint_q975",
                                        "p_value", "significant", "n_records"])


def _archive_events_section(run: RunData, figs: _Figures) -> str:
    """Events of the whole run with their q-values (which survive archive-wide FDR control)
    and the lead/lag figure."""
    from pipelines.outputs_schema import table as output_table

    tables = {}
    for key in ("archive_events", "lead_lag"):
        path = run.folder / output_table(key).path
        tables[key] = pd.read_parquet(path) if path.is_file() else None
    events, lead_lag = tables["archive_events"], tables["lead_lag"]
    if events is None or not len(events):
        return ""
    survive = int(events["survives_fdr"].astype(bool).sum())
    body = H.note_html(f"{survive} of {len(events)} events survive false discovery rate control "
                       "(Benjamini-Hochberg q-value at most alpha, over all cores and variables); "
                       "events significant on their own but not after it are likely false among "
                       "this many series.")
    body += H.table_html(events, ["core_id", "event_id", "kind", "direction", "onset_median", "onset_q025",
                                  "onset_q975", "p_value", "q_value", "significant", "survives_fdr", "note"])
    body += figs.add(lambda: lead_lag_figure(lead_lag), "lead_lag", "Lead/lag across cores",
                     "For each event found in several cores: the 95 % range and median of the onset "
                     "difference over all member pairs (age ensembles taken as independent).")
    return H.section("archive-events", "Events across the archive", body)


def _sections(run: RunData, figs) -> tuple[str, str, list[str]]:
    """The composite, archive-events and core sections (figures through ``figs``)."""
    return _stack_section(run, figs), _archive_events_section(run, figs), [
        _core_section(core, run, figs) for core in run.cores]


def draw_claimed(run_dir: pathlib.Path | RunData, png: bool,
                 claims: FigureClaims) -> dict[str, style.SavedFigure | None]:
    """Draw every figure of the report nobody has claimed yet (see :mod:`pipelines.report.drawing`);
    ``run_dir`` may be the run already read."""
    run = run_dir if isinstance(run_dir, RunData) else read_run(run_dir)
    drawer = _Claiming(DrawnFigures(run.folder, png, claims))
    with style.report_style():
        _sections(run, drawer)
    return drawer.figures.drawn


def draw_core_claimed(run_dir: pathlib.Path, core_id: str, claims: FigureClaims) -> dict[str, style.SavedFigure | None]:
    """Draw the figures of one published core of a run still in progress (those that need only
    the core's own tables; the training sets' figures wait for the report), claiming each."""
    core = read_core(run_dir, core_id)
    if not core.tables:
        return {}
    run = RunData(folder=pathlib.Path(run_dir), manifest={}, summary=None, stack=None, cores=[core], training=[])
    drawer = _Claiming(DrawnFigures(run.folder, False, claims))
    with style.report_style():
        _core_section(core, run, drawer)
    return drawer.figures.drawn


def _drawn_in_parallel(run: RunData, png: bool, helper, exports) -> tuple[dict[str, style.SavedFigure | None],
                                                                          dict | None]:
    """The figures drawn by this process and ``helper`` (none: nothing drawn yet) and, when
    the helper was asked for the exports (``exports``, see :mod:`pipelines.report.drawing`)
    and answered, what it reported of them (``None`` otherwise)."""
    if helper is None:
        return {}, None
    early = not png and getattr(helper, "claims", None) is not None  # a run's helper (no PNG)
    claims = helper.claims if early else FigureClaims.create()
    try:
        # this process draws at once (a core figure the helper has not reached is drawn here,
        # not waited for); the helper writes the CSV copies, this process then the netCDF
        asked = {"csv": exports.get("csv", True) if isinstance(exports, dict) else True, "netcdf": False}
        future = helper.submit(run.folder, png, claims, asked if exports else False)
        mine = DrawnFigures(run.folder, png, claims)
        with style.report_style():
            _sections(run, _Claiming(mine))
        if exports:
            from pipelines.report.exports import netcdf_part, with_netcdf
        netcdf = netcdf_part(run) if exports else None
        drawn: dict[str, style.SavedFigure | None] = helper.early_figures() if early else {}
        drawn.update(mine.drawn)
        try:
            delivered = future.result()
        except Exception:  # noqa: BLE001 - what the helper did not deliver is done here
            return drawn, None
        drawn.update(delivered.pop("drawn"))
        return drawn, (with_netcdf(delivered, netcdf) if exports else None)
    finally:
        if not early:
            claims.remove()


def write_report_and_exports(run_dir: str | pathlib.Path, helper: ReportHelper | None = None) -> list[str]:
    """The report (:func:`write_run_report`) and the exports
    (:func:`pipelines.report.exports.write_exports`) of a run folder, the exports written by
    ``helper`` while this process draws when one is given; returns a note for each that failed
    (the science outputs stay valid)."""
    notes: list[str] = []
    try:
        _, exported = _report(run_dir, False, None, helper, exports=True)
    except Exception as error:  # noqa: BLE001
        notes.append(f"report not written: {type(error).__name__}: {error}")
        exported = None
    if exported is not None and exported["exports"]:
        notes.append(f"exports not written: {exported['exports']}")
    elif exported is None:
        from pipelines.report.exports import write_exports

        try:
            write_exports(run_dir)
        except Exception as error:  # noqa: BLE001
            notes.append(f"exports not written: {type(error).__name__}: {error}")
    return notes


def write_report_with_exports(run_dir: str | pathlib.Path, png: bool = False, csv: bool = True,
                              unreadable: list[str] | None = None) -> tuple[pathlib.Path, list[pathlib.Path]]:
    """:func:`write_run_report` and :func:`pipelines.report.exports.write_exports` (same
    arguments), the exports written by the report's helper process while this one draws when
    there is one; an export that fails there is done again here, so its error is raised.

    Returns
    -------
    (pathlib.Path, list of pathlib.Path)
        The report file and the export files written.
    """
    report, exported = _report(run_dir, png, None, None, exports={"csv": csv})
    if exported is None or exported["exports"]:
        from pipelines.report.exports import write_exports

        return report, write_exports(run_dir, csv=csv, unreadable=unreadable)
    if unreadable is not None:
        unreadable.extend(exported["unreadable"])
    return report, [pathlib.Path(p) for p in exported["written"]]


def write_run_report(run_dir: str | pathlib.Path, png: bool = False, helpers: int | None = None,
                     helper: ReportHelper | None = None) -> pathlib.Path:
    """Write ``report.html`` and ``figures/*.svg`` (and ``*.png``) for a run folder.

    Parameters
    ----------
    run_dir : path-like
        A run folder (see DEVELOPERS.md, "The run folder"). Missing tables are tolerated:
        the report says what is absent.
    png : bool
        Also write a PNG copy of every figure (a second drawing of each).
    helpers : int, optional
        Helper processes drawing figures alongside this one (0 or 1; default
        :func:`pipelines.report.drawing.helpers_wanted`). The bytes do not depend on it.
    helper : ReportHelper, optional
        A helper process started earlier (used whatever ``helpers`` says, not closed here).

    Returns
    -------
    pathlib.Path
        The report file.
    """
    return _report(run_dir, png, helpers, helper, exports=False)[0]


def _report(run_dir: str | pathlib.Path, png: bool, helpers: int | None, helper, exports) -> tuple[pathlib.Path,
                                                                                              dict | None]:
    """:func:`write_run_report`, the helper asked to write the exports first when ``exports``;
    returns the report file and what the helper reported of the exports (None: not done there)."""
    run = read_run(run_dir)
    own = None
    if helper is None:
        own = helper = own_helper(run, helpers)
    try:
        drawn, exported = _drawn_in_parallel(run, png, helper, exports)
    finally:
        if own is not None:
            own.close()
    figs = _Figures(run.folder, png=png, drawn=drawn)
    with style.report_style():
        stack, archive_events, cores = _sections(run, figs)
    figs.remove_stale()
    toc = [("summary", "Archive summary")]
    if stack:
        toc.append(("composite", "Regional composite"))
    if archive_events:
        toc.append(("archive-events", "Events across the archive"))
    toc += [(f"core-{H.anchor(c.core_id)}", f"Core {c.core_id}") for c in run.cores]
    version = (run.manifest.get("versions") or {}).get("downcore") or downcore_version()
    title = f"downcore run report: {run.folder.name}"
    subtitle = (f"{len(run.cores)} core(s); ages in cal BP (years before 1950 CE); "
                "bands are ensemble quantiles")
    footer = (f"Written by downcore {version} from the tables of this run folder. "
              f"{figs.count} figures, also saved as {'PNG and ' if png else ''}SVG in figures/.")
    text = H.page(title, subtitle, toc, _summary_section(run) + stack + archive_events + "".join(cores),
                  footer)
    return atomic_write_text(run.folder / REPORT_NAME, text), exported

