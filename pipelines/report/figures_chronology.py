"""Chronology figures: the age-depth model, the deposition time and the date outliers.

Each function takes the tables of one core (as read by :mod:`pipelines.report.rundata`) and
returns a Matplotlib figure, or ``None`` when the tables it needs are absent.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from pipelines.report import style
from pipelines.report.html import probability_text
from pipelines.report.rundata import CoreData, member_columns
from proxies.warning_sinks import quiet_warnings

__all__ = ["age_depth_figure", "deposition_time_figure", "outlier_figure", "hyperparameter_figure",
           "OUTLIER_LINE", "ensemble_matrix", "hiatus_marks", "all_outlier_probabilities_negligible",
           "NEGLIGIBLE_PROBABILITY"]

#: outlier probability above which a date is drawn as "more likely an outlier than not"
OUTLIER_LINE = 0.5

#: below this an outlier probability is printed "< 0.001" and counts as none
NEGLIGIBLE_PROBABILITY = 0.001

#: ensemble members drawn as thin lines behind the bands
MEMBERS_DRAWN = 25


def ensemble_matrix(table: pd.DataFrame | None) -> np.ndarray | None:
    """The member columns of an ensemble table as an array of shape (n, M), or None."""
    if table is None:
        return None
    columns = member_columns(table)
    if not columns:
        return None
    return table[columns].to_numpy(dtype=float)


def hiatus_marks(chron: pd.DataFrame | None) -> list[tuple[float, float]]:
    """(depth [cm], median gap [yr]) of each hiatus recorded in ``chronology.parquet``."""
    if chron is None or "hiatus_gap_yr" not in chron.columns:
        return []
    gaps = pd.to_numeric(chron["hiatus_gap_yr"], errors="coerce")
    rows = chron[gaps.notna()]
    return [(float(d), float(g)) for d, g in zip(rows["depth_cm"], gaps[gaps.notna()])]


def _draw_hiatuses(ax, marks, handles: list | None = None) -> None:
    """A hiatus is a dash-dot line across the panel with its median gap written beside it."""
    for depth, gap in marks:
        ax.axhline(depth, color=style.CLAY, linestyle="-.", linewidth=1.0, zorder=6)
        ax.annotate(f"hiatus, ~{gap:,.0f} yr", xy=(0.99, depth), xycoords=("axes fraction", "data"),
                    ha="right", va="bottom", fontsize=7, color=style.CLAY)
    if marks and handles is not None:
        handles.append(Line2D([], [], color=style.CLAY, linestyle="-.", label="hiatus"))


def _flag(dates: pd.DataFrame, column: str) -> np.ndarray:
    if column not in dates.columns:
        return np.zeros(len(dates), dtype=bool)
    values = dates[column]
    if values.dtype == bool:
        return values.to_numpy()
    text = values.astype(str).str.strip().str.lower()
    return text.isin(["true", "1", "yes", "1.0"]).to_numpy()


def _outlier_prob(dates: pd.DataFrame) -> np.ndarray:
    if "outlier_prob" not in dates.columns:
        return np.full(len(dates), np.nan)
    return pd.to_numeric(dates["outlier_prob"], errors="coerce").to_numpy(float)


def _date_glyph_height(depth: np.ndarray) -> float:
    span = float(np.nanmax(depth) - np.nanmin(depth)) if depth.size else 1.0
    return max(span, 1.0) * 0.045


#: a date density glyph is drawn through at most this many points (it is ~1/20 of the axis
#: high; finer detail is not visible and only weighs down the vector figure)
DENSITY_POINTS = 100


def _thinned(age: np.ndarray, dens: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """A density curve resampled onto at most :data:`DENSITY_POINTS` evenly spaced ages,
    keeping its end points; the peak height is preserved by rescaling."""
    keep = np.isfinite(age) & np.isfinite(dens)
    age, dens = age[keep], dens[keep]
    if age.size <= DENSITY_POINTS:
        return age, dens
    grid = np.linspace(age[0], age[-1], DENSITY_POINTS)
    thin = np.interp(grid, age, dens)
    if thin.max() > 0:
        thin *= dens.max() / thin.max()
    return grid, thin


def _draw_densities(ax, dates: pd.DataFrame, densities: pd.DataFrame, height: float) -> bool:
    """Calibrated date densities as bumps above each date's depth; True if any was drawn."""
    drawn = False
    outlier = _outlier_prob(dates)
    excluded = _flag(dates, "exclude")
    for i, row in enumerate(dates.itertuples(index=False)):
        part = densities[densities["label"].astype(str) == str(row.label)]
        if part.empty:
            continue
        part = part.sort_values("age_cal_bp")
        age, dens = _thinned(part["age_cal_bp"].to_numpy(float), part["density"].to_numpy(float))
        if not np.isfinite(dens).any() or np.nanmax(dens) <= 0:
            continue
        top = row.depth_cm - height * dens / np.nanmax(dens)
        if np.isfinite(outlier[i]) and outlier[i] >= OUTLIER_LINE:
            ax.fill_between(age, top, row.depth_cm, facecolor="white", edgecolor=style.CLAY,
                            hatch="////", linewidth=0.9, linestyle="--", zorder=4)
        elif excluded[i]:
            ax.fill_between(age, top, row.depth_cm, facecolor="none", edgecolor=style.INK,
                            linewidth=0.9, linestyle=":", zorder=4)
        else:
            ax.fill_between(age, top, row.depth_cm, facecolor=style.SAND, edgecolor=style.INK,
                            linewidth=0.6, alpha=0.95, zorder=4)
        drawn = True
    return drawn


def _draw_hpd_bars(ax, core: CoreData) -> bool:
    """Fallback: 95 % HPD ranges as bars and the calibrated median as a tick."""
    dates = core.table("dates")
    ranges = core.hpd_ranges(0.954)
    outlier = _outlier_prob(dates)
    excluded = _flag(dates, "exclude")
    drawn = False
    for i, row in enumerate(dates.itertuples(index=False)):
        is_outlier = np.isfinite(outlier[i]) and outlier[i] >= OUTLIER_LINE
        colour = style.CLAY if is_outlier else style.INK
        ls = "--" if is_outlier else (":" if excluded[i] else "-")
        for young, old in ranges[i]:
            ax.plot([young, old], [row.depth_cm, row.depth_cm], color=colour, linestyle=ls,
                    linewidth=3.0, solid_capstyle="butt", zorder=4)
            drawn = True
        value = float(row.cal_median_bp)
        if np.isfinite(value):
            ax.plot([value], [row.depth_cm], marker="D" if is_outlier else "o",
                    markersize=4, markerfacecolor="white", markeredgecolor=colour, zorder=5)
            drawn = True
    return drawn


def age_depth_figure(core: CoreData):
    """Age-depth model: median, 68 % and 95 % bands, a few ensemble paths and the dates.

    Depth runs downwards on the vertical axis and age to the right. Dates are drawn as their
    calibrated densities (from ``date_densities.parquet``) or, without that file, as their
    95 % HPD ranges.
    """
    chron = core.table("chronology")
    if chron is None:
        return None
    chron = chron.sort_values("depth_cm")
    depth = chron["depth_cm"].to_numpy(float)
    fig, ax = style.new_figure(7.2, 4.6)
    handles: list = []
    ens_table = core.table("age_ensemble")
    ens = ensemble_matrix(ens_table)
    if ens is not None and ens_table is not None:
        ens_depth = ens_table["depth_cm"].to_numpy(float)
        order = np.argsort(ens_depth)
        ens_depth, ens = ens_depth[order], ens[order]
        step = max(1, ens.shape[1] // MEMBERS_DRAWN)
        style.ensemble_lines(ax, ens[:, ::step], ens_depth, color=style.SLATE, linewidth=0.35,
                             alpha=0.35, zorder=2)
        q16, q84 = np.nanquantile(ens, [0.16, 0.84], axis=1)
        ax.fill_betweenx(ens_depth, q16, q84, color=style.BAND_DARK, linewidth=0, zorder=1.5)
        handles.append(Patch(color=style.BAND_DARK, label="68 % range"))
        handles.append(Line2D([], [], color=style.SLATE, linewidth=0.6, alpha=0.6,
                              label="ensemble members (some)"))
    ax.fill_betweenx(depth, chron["age_q025"], chron["age_q975"], color=style.BAND_LIGHT,
                     linewidth=0, zorder=1)
    ax.plot(chron["age_median"], depth, color=style.INK, linewidth=1.4, zorder=3)
    handles = [Line2D([], [], color=style.INK, linewidth=1.4, label="median age"),
               Patch(color=style.BAND_LIGHT, label="95 % range")] + handles
    dates = core.table("dates")
    if dates is not None and len(dates):
        densities = core.table("date_densities")
        height = _date_glyph_height(depth)
        if densities is not None and _draw_densities(ax, dates, densities, height):
            handles.append(Patch(facecolor=style.SAND, edgecolor=style.INK,
                                 label="calibrated date density"))
        elif _draw_hpd_bars(ax, core):
            handles.append(Line2D([], [], color=style.INK, linewidth=3,
                                  label="date, 95 % HPD range"))
        if np.any(_outlier_prob(dates) >= OUTLIER_LINE):
            handles.append(Patch(facecolor="white", edgecolor=style.CLAY, hatch="////",
                                 linestyle="--", label=f"outlier probability ≥ {OUTLIER_LINE:g}"))
        if _flag(dates, "exclude").any():
            handles.append(Patch(facecolor="none", edgecolor=style.INK, linestyle=":",
                                 label="excluded from the model"))
    _draw_hiatuses(ax, hiatus_marks(chron), handles)
    ax.set_ylim(np.nanmax(depth) * 1.02 + 1, np.nanmin(depth) - _date_glyph_height(depth) * 1.3)
    ax.set_xlabel("age [cal BP]")
    ax.set_ylabel("depth [cm]")
    ax.set_title(f"{core.core_id}: age-depth model")
    ax.legend(handles=handles, loc="lower left", ncol=1)
    return fig


def _rate_ensemble(core: CoreData, hiatus_depths=()) -> tuple[np.ndarray, np.ndarray] | None:
    """Deposition time of every member between neighbouring depths; intervals that cross a
    hiatus are left out (their spike is the gap, not a deposition time)."""
    table = core.table("age_ensemble")
    ens = ensemble_matrix(table)
    if ens is None or table is None or ens.shape[0] < 2:
        return None
    depth = table["depth_cm"].to_numpy(float)
    order = np.argsort(depth)
    depth, ens = depth[order], ens[order]
    thick = np.diff(depth)
    keep = thick > 0
    for h in hiatus_depths:
        keep &= ~((depth[:-1] <= h) & (depth[1:] > h))
    rate = np.diff(ens, axis=0)[keep] / thick[keep, None]
    mid = 0.5 * (depth[1:] + depth[:-1])[keep]
    return mid, rate


def deposition_time_figure(core: CoreData):
    """Deposition time [yr/cm] down the core, drawn like a core log: depth downwards on the
    vertical axis, deposition time on a logarithmic horizontal axis (so that a slow interval or
    a hiatus does not flatten the rest), ensemble median with 68 % and 95 % ranges (from
    ``age_ensemble.parquet``), else the chronology's ``deposition_time_yr_cm``."""
    chron = core.table("chronology")
    marks = hiatus_marks(chron)
    from_ens = _rate_ensemble(core, [d for d, _ in marks])
    if from_ens is None and (chron is None or "deposition_time_yr_cm" not in chron.columns):
        return None
    fig, ax = style.new_figure(4.8, 4.6)
    shown = []
    if from_ens is not None:
        mid, rate = from_ens
        with quiet_warnings(RuntimeWarning):  # an event layer: no member has a positive rate there (a gap)
            q = np.nanquantile(np.where(rate > 0, rate, np.nan), [0.025, 0.16, 0.5, 0.84, 0.975], axis=1)
        ax.fill_betweenx(mid, q[0], q[4], step="mid", color=style.BAND_LIGHT, linewidth=0,
                         label="95 % range")
        ax.fill_betweenx(mid, q[1], q[3], step="mid", color=style.BAND_DARK, linewidth=0,
                         label="68 % range")
        ax.plot(q[2], mid, color=style.INK, label="median of members")
        shown.append(q[2])
    if chron is not None and "deposition_time_yr_cm" in chron.columns:
        chron = chron.sort_values("depth_cm")
        slope = chron["deposition_time_yr_cm"].to_numpy(dtype=float).copy()
        chron_depth = chron["depth_cm"].to_numpy(dtype=float)
        for h, _ in marks:  # the rows whose slope straddles the hiatus
            slope[np.abs(chron_depth - h) <= np.min(np.abs(np.diff(chron_depth)), initial=1.0) * 1.01] = np.nan
        ax.plot(slope, chron_depth, color=style.CLAY, linestyle="--",
                linewidth=1.0, label="slope of the median age")
        shown.append(slope)
    values = np.concatenate([np.asarray(v, dtype=float).ravel() for v in shown])
    values = values[np.isfinite(values) & (values > 0)]
    if values.size:
        low, high = np.quantile(values, [0.02, 0.98])
        ax.set_xscale("log")
        style.plain_log_labels(ax.xaxis)
        ax.set_xlim(max(low / 2.0, 1e-3), high * 2.0)
    _draw_hiatuses(ax, marks)
    ax.invert_yaxis()
    ax.set_ylabel("depth [cm]")
    ax.set_xlabel("deposition time [yr/cm, log scale]")
    ax.set_title(f"{core.core_id}: deposition time")
    ax.legend(loc="lower left", fontsize=7)
    return fig


def all_outlier_probabilities_negligible(dates: pd.DataFrame | None) -> bool:
    """True when every date has an outlier probability below :data:`NEGLIGIBLE_PROBABILITY`
    (the chart would be a row of empty bars: the report says so in one line instead)."""
    if dates is None or "outlier_prob" not in dates.columns or not len(dates):
        return False
    prob = _outlier_prob(dates)
    return bool(np.isfinite(prob).all() and (prob < NEGLIGIBLE_PROBABILITY).all())


def outlier_figure(core: CoreData):
    """Posterior outlier probability of every date, in depth order (None when every one is
    negligible, see :func:`all_outlier_probabilities_negligible`)."""
    dates = core.table("dates")
    if dates is None or "outlier_prob" not in dates.columns or not len(dates):
        return None
    if all_outlier_probabilities_negligible(dates):
        return None
    dates = dates.sort_values("depth_cm", kind="stable")
    prob = _outlier_prob(dates)
    excluded = _flag(dates, "exclude")
    labels = [f"{lab}  ({d:g} cm){'  excluded' if ex else ''}"
              for lab, d, ex in zip(dates["label"].astype(str), dates["depth_cm"], excluded)]
    y = np.arange(len(dates))
    fig, ax = style.new_figure(7.2, 0.9 + 0.28 * len(dates))
    high = np.nan_to_num(prob) >= OUTLIER_LINE
    ax.barh(y[~high], np.nan_to_num(prob[~high]), color=style.MOSS, height=0.6,
            label=f"below {OUTLIER_LINE:g}")
    if high.any():
        ax.barh(y[high], prob[high], facecolor="white", edgecolor=style.CLAY, hatch="////",
                height=0.6, label=f"{OUTLIER_LINE:g} or more: likely outlier")
    for yi, p in zip(y, prob):
        ax.text(min(np.nan_to_num(p) + 0.015, 0.93), yi, probability_text(p),
                va="center", fontsize=7, color=style.INK)
    ax.axvline(OUTLIER_LINE, color=style.INK, linestyle=":", linewidth=0.8)
    ax.set_yticks(y, labels)
    ax.invert_yaxis()
    ax.set_xlim(0, 1)
    ax.set_xlabel("posterior outlier probability [0–1]")
    ax.grid(axis="y", visible=False)
    ax.set_title(f"{core.core_id}: date outlier probability")
    ax.legend(loc="lower right")
    return fig


def hyperparameter_figure(core: CoreData):
    """Posterior weight of the accumulation prior's hyper-parameters, one panel each.

    From ``hyperparameters.parquet``: the weights of the grid points summed over the other
    hyper-parameters (mean rate, rate variability and, for the memory model, memory).
    """
    table = core.table("hyperparameters")
    if table is None or not len(table):
        return None
    panels = [("mean_rate_yr_cm", "mean deposition time [yr/cm]"), ("rate_variability", "rate variability (CV)")]
    if "rate_memory" in table.columns and table["rate_memory"].nunique() > 1:
        panels.append(("rate_memory", "rate memory (persistence)"))
    fig, axes = style.new_figure(2.6 * len(panels), 2.4, ncols=len(panels))
    axes = np.atleast_1d(axes)
    for ax, (column, label) in zip(axes, panels):
        marginal = table.groupby(column)["weight"].sum().sort_index()
        positions = np.arange(marginal.size)
        ax.bar(positions, marginal.to_numpy(float), color=style.MOSS, width=0.7)
        ax.set_xticks(positions, [f"{v:.3g}" for v in marginal.index], rotation=45, fontsize=7)
        ax.set_xlabel(label)
        ax.set_ylim(0, 1)
        ax.grid(axis="x", visible=False)
    axes[0].set_ylabel("posterior weight")
    fig.suptitle(f"{core.core_id}: accumulation prior, posterior weights", fontsize=9)
    return fig
