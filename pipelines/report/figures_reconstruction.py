"""Reconstruction figures: a core's series with its bands and anomalies, and the regional
composite (stack)."""

from __future__ import annotations

import numpy as np
import pandas as pd
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from pipelines.report import style
from pipelines.report.figures_calibration import sample_ages
from pipelines.report.rundata import CoreData, Series, quantile_columns

__all__ = ["reconstruction_figure", "stack_figure", "band_pairs"]


def band_pairs(table: pd.DataFrame, prefix: str) -> list[tuple[float, str, str]]:
    """Symmetric quantile pairs ``(level, low column, high column)``, widest first.

    ``level`` is the probability content, e.g. 0.95 for ``q025``/``q975``.
    """
    q = quantile_columns(table, prefix)
    pairs = []
    for p, low in q.items():
        if p >= 0.5:
            continue
        partner = round(1.0 - p, 3)
        if partner in q:
            pairs.append((round(1.0 - 2 * p, 3), low, q[partner]))
    return sorted(pairs, reverse=True)


def _bands(ax, age, rows: pd.DataFrame, prefix: str, handles: list) -> None:
    fills = (style.BAND_LIGHT, style.BAND_DARK, style.FOG)
    for i, (level, low, high) in enumerate(band_pairs(rows, prefix)[:2]):
        ax.fill_between(age, rows[low].to_numpy(float), rows[high].to_numpy(float),
                        color=fills[i], linewidth=0, zorder=1 + i)
        handles.append(Patch(color=fills[i], label=f"{level * 100:g} % range"))


def _unit_text(units: str) -> str:
    return f" [{units}]" if units else ""


def _samples_for(core: CoreData, series: Series) -> pd.DataFrame | None:
    samples = core.table("calibrated_samples")
    if samples is None:
        return None
    sel = samples["variable"].astype(str) == series.variable
    if series.proxy and "proxy" in samples.columns:
        sel &= samples["proxy"].astype(str) == series.proxy
    part = samples[sel]
    if part.empty:
        return None
    if "age_cal_bp" in part.columns:
        ages = pd.to_numeric(part["age_cal_bp"], errors="coerce").to_numpy(float)
    else:
        ages = sample_ages(core, part["depth_cm"].to_numpy(float))
        if ages is None:
            return None
    outside = part["outside_calibration_range"].fillna(False).to_numpy(bool) \
        if "outside_calibration_range" in part.columns else np.zeros(len(part), dtype=bool)
    return pd.DataFrame({"age": ages, "outside": outside,
                         "median": pd.to_numeric(part["value_median"], errors="coerce"),
                         "low": pd.to_numeric(part.get("value_q025"), errors="coerce")
                         if "value_q025" in part.columns else np.nan,
                         "high": pd.to_numeric(part.get("value_q975"), errors="coerce")
                         if "value_q975" in part.columns else np.nan})


def reconstruction_figure(core: CoreData, series: Series):
    """A reconstructed series: values with bands and the calibrated samples (top), anomalies
    with bands, warm/cold shading and the reference window (middle), and the number of
    samples behind each grid point (bottom, when recorded)."""
    rows = series.rows
    age = rows["age_cal_bp"].to_numpy(float)
    has_anomaly = "anomaly_median" in rows.columns
    has_count = "n_samples" in rows.columns
    ratios = [3.0] + ([2.4] if has_anomaly else []) + ([0.8] if has_count else [])
    fig, axes = style.new_figure(7.2, 1.0 + 1.2 * sum(ratios), nrows=len(ratios), sharex=True,
                                 squeeze=False, height_ratios=ratios)
    axes = list(axes[:, 0])
    ax = axes[0]
    handles: list = [Line2D([], [], color=style.INK, label="median")]
    _bands(ax, age, rows, "value", handles)
    ax.plot(age, rows["value_median"].to_numpy(float), color=style.INK, zorder=4)
    samples = _samples_for(core, series)
    if samples is not None:
        err = np.vstack([samples["median"] - samples["low"], samples["high"] - samples["median"]])
        ax.errorbar(samples["age"], samples["median"],
                    yerr=None if not np.isfinite(err).any() else np.abs(err),
                    linestyle="none", marker="o", markersize=2.8, markerfacecolor="white",
                    markeredgecolor=style.CLAY, ecolor=(0.64, 0.29, 0.18, 0.35), elinewidth=0.4,
                    markeredgewidth=0.7, zorder=5)
        handles.append(Line2D([], [], linestyle="none", marker="o", markerfacecolor="white",
                              markeredgecolor=style.CLAY, label="calibrated samples (95 %)"))
        outside = samples[samples["outside"]]
        if len(outside):
            ax.plot(outside["age"], outside["median"], linestyle="none", marker="x",
                    markersize=5, color=style.INK, markeredgewidth=0.9, zorder=6)
            handles.append(Line2D([], [], linestyle="none", marker="x", color=style.INK,
                                  label="outside the calibrated range"))
    ax.set_ylabel(f"{series.variable}{_unit_text(series.units)}")
    ax.legend(handles=handles, loc="best", ncol=2)
    ax.set_title(f"{core.core_id}: {series.label}")
    next_ax = 1
    if has_anomaly:
        axa = axes[next_ax]
        next_ax += 1
        med = rows["anomaly_median"].to_numpy(float)
        ahandles: list = []
        window = series.reference_window
        if window is not None:
            axa.axvspan(min(window), max(window), facecolor="none", edgecolor=style.INK,
                        hatch="xx", linewidth=0, alpha=0.45, zorder=5)
            ahandles.append(Patch(facecolor="none", edgecolor=style.INK, hatch="xx",
                                  label=f"reference {min(window):g}–{max(window):g} cal BP"))
        _bands(axa, age, rows, "anomaly", ahandles)
        axa.fill_between(age, 0, med, where=med > 0, interpolate=True, color=style.WARM,
                         alpha=0.85, linewidth=0, zorder=3)
        axa.fill_between(age, 0, med, where=med < 0, interpolate=True, facecolor=style.COOL,
                         edgecolor=style.SLATE, hatch="////", linewidth=0, zorder=3)
        axa.plot(age, med, color=style.INK, linewidth=0.9, zorder=4)
        axa.axhline(0, color=style.INK, linewidth=0.6)
        ahandles += [Patch(color=style.WARM, label="above reference"),
                     Patch(facecolor=style.COOL, edgecolor=style.SLATE, hatch="////",
                           label="below reference")]
        axa.set_ylabel(f"anomaly{_unit_text(series.units)}")
        axa.legend(handles=ahandles, loc="best", ncol=2)
    if has_count:
        axn = axes[next_ax]
        count = pd.to_numeric(rows["n_samples"], errors="coerce").to_numpy(float)
        axn.fill_between(age, 0, count, step="mid", color=style.MOSS, alpha=0.7, linewidth=0)
        axn.set_ylabel("samples [count]")
        axn.set_ylim(bottom=0)
    style.age_axis(axes[-1])
    return fig


def stack_figure(stack: pd.DataFrame, variable: str, units: str = ""):
    """Regional composite of one variable: median, bands and the number of records."""
    rows = stack[stack["variable"].astype(str) == variable].sort_values("age_cal_bp")
    if rows.empty:
        return None
    age = rows["age_cal_bp"].to_numpy(float)
    has_count = "n_records" in rows.columns
    fig, axes = style.new_figure(7.2, 3.8 if has_count else 2.9, nrows=2 if has_count else 1,
                                 sharex=True, squeeze=False,
                                 height_ratios=[3, 1] if has_count else [1])
    axes = list(axes[:, 0])
    handles: list = [Line2D([], [], color=style.INK, label="median")]
    _bands(axes[0], age, rows, "value", handles)
    axes[0].plot(age, rows["value_median"].to_numpy(float), color=style.INK, zorder=4)
    method = str(rows["method"].iloc[0]) if "method" in rows.columns else "anomaly"
    if method == "zscore":
        axes[0].set_ylabel(f"{variable} [z-score]")
    else:
        axes[0].set_ylabel(f"{variable} departure{_unit_text(units)}")
    axes[0].axhline(0, color=style.INK, linewidth=0.6, linestyle=":")
    axes[0].legend(handles=handles, loc="best", ncol=3)
    axes[0].set_title(f"regional composite: {variable}")
    if has_count:
        count = pd.to_numeric(rows["n_records"], errors="coerce").to_numpy(float)
        axes[1].step(age, count, where="mid", color=style.MOSS)
        axes[1].set_ylabel("records [count]")
        axes[1].set_ylim(0, max(1.0, np.nanmax(count) if np.isfinite(count).any() else 1) + 0.5)
    style.age_axis(axes[-1])
    return fig
