"""Calibration figures: cross-validated predictions of a training set and the analogue
quality of the fossil samples through time."""

from __future__ import annotations

import numpy as np
import pandas as pd

from pipelines.outputs_schema import table as output_table
from pipelines.report import style
from pipelines.report.rundata import CoreData, TrainingData

__all__ = ["cv_scatter_figure", "cv_statistics", "analogue_figure", "diagnostic_columns",
           "training_sets_of", "sample_ages"]



def _is_text(column: pd.Series) -> bool:
    return column.dtype == object or pd.api.types.is_string_dtype(column)


def cv_statistics(cv: pd.DataFrame) -> dict[str, float]:
    """RMSEP, r² and mean and maximum bias of cross-validated predictions.

    RMSEP = sqrt(mean((predicted - observed)²)); r² is the squared Pearson correlation;
    maximum bias is the largest mean residual over ten equal-width bins of the observed
    gradient (Birks et al. 1990, doi:10.1098/rstb.1990.0062).
    """
    obs = pd.to_numeric(cv["observed"], errors="coerce").to_numpy(float)
    pred = pd.to_numeric(cv["predicted"], errors="coerce").to_numpy(float)
    keep = np.isfinite(obs) & np.isfinite(pred)
    obs, pred = obs[keep], pred[keep]
    if obs.size < 3:
        return {"n": float(obs.size)}
    resid = pred - obs
    edges = np.linspace(obs.min(), obs.max(), 11)
    which = np.clip(np.digitize(obs, edges[1:-1]), 0, 9)
    bin_bias = [resid[which == b].mean() for b in range(10) if np.any(which == b)]
    return {"n": float(obs.size), "rmsep": float(np.sqrt(np.mean(resid ** 2))),
            "r2": float(np.corrcoef(obs, pred)[0, 1] ** 2), "mean_bias": float(resid.mean()),
            "max_bias": float(max(bin_bias, key=abs))}


def cv_scatter_figure(training: TrainingData, units: str = ""):
    """Cross-validated prediction against observation (with the 1:1 line) and residuals;
    ``units`` of the training target label the axes."""
    cv = training.cv
    if cv is None or not len(cv):
        return None
    obs = pd.to_numeric(cv["observed"], errors="coerce").to_numpy(float)
    pred = pd.to_numeric(cv["predicted"], errors="coerce").to_numpy(float)
    stats = cv_statistics(cv)
    fig, (ax, axr) = style.new_figure(7.2, 3.3, ncols=2, width_ratios=[1.15, 1])
    lo = float(np.nanmin([np.nanmin(obs), np.nanmin(pred)]))
    hi = float(np.nanmax([np.nanmax(obs), np.nanmax(pred)]))
    pad = 0.04 * (hi - lo if hi > lo else 1.0)
    ax.plot([lo - pad, hi + pad], [lo - pad, hi + pad], color=style.INK, linestyle="--",
            linewidth=0.9, label="1:1")
    ax.plot(obs, pred, linestyle="none", marker="o", markersize=3.2,
            markerfacecolor=style.FOG, markeredgecolor=style.SLATE, markeredgewidth=0.7,
            label="training sample")
    unit = f" [{units}]" if units else ""
    ax.set_xlabel(f"observed{unit}")
    ax.set_ylabel(f"predicted (cross-validated){unit}")
    text = f"n = {stats['n']:.0f}"
    if "rmsep" in stats:
        text += f"\nRMSEP = {stats['rmsep']:.3g}\nr² = {stats['r2']:.2f}"
    ax.text(0.03, 0.97, text, transform=ax.transAxes, va="top", fontsize=7.5, color=style.INK)
    ax.legend(loc="lower right")
    ax.set_title(f"training set '{training.name}': cross-validation")
    axr.axhline(0, color=style.INK, linewidth=0.8)
    axr.plot(obs, pred - obs, linestyle="none", marker="s", markersize=3,
             markerfacecolor="white", markeredgecolor=style.CLAY, markeredgewidth=0.7)
    axr.set_xlabel(f"observed{unit}")
    axr.set_ylabel(f"predicted − observed{unit}")
    if "max_bias" in stats:
        axr.set_title(f"residuals (max bias {stats['max_bias']:.2g})", fontweight="normal")
    return fig


def training_sets_of(core: CoreData, training: list[TrainingData]) -> list[TrainingData]:
    """The training sets a core's calibration used: those whose name appears in any text
    cell of its ``calibration.parquet``; all of them if the core has assemblage diagnostics
    but names none."""
    table = core.table("calibration")
    used: list[TrainingData] = []
    if table is not None and len(table):
        cells = {str(v) for c in table.columns if _is_text(table[c])
                 for v in table[c].tolist() if v is not None}
        text = " ".join(cells)
        used = [t for t in training if t.name in cells or f"'{t.name}'" in text]
    diagnostics = core.table("calibration_diagnostics")
    if not used and diagnostics is not None and len(diagnostics):
        used = list(training)
    return used


def sample_ages(core: CoreData, depth_cm: np.ndarray) -> np.ndarray | None:
    """Median age [cal BP] at the given depths, from the core's chronology."""
    chron = core.table("chronology")
    if chron is None or not len(chron):
        return None
    chron = chron.sort_values("depth_cm")
    return np.interp(depth_cm, chron["depth_cm"].to_numpy(float),
                     chron["age_median"].to_numpy(float), left=np.nan, right=np.nan)


def diagnostic_columns(diag: pd.DataFrame) -> tuple[list[str], list[str]]:
    """(measure columns, limit columns) of ``calibration_diagnostics.parquet`` present in
    ``diag``, as the run-folder schema declares them (``role``), in declaration order."""
    declared = output_table("calibration_diagnostics").columns
    present = [c for c in declared if c.name in diag.columns]
    return ([c.name for c in present if c.role == "measure"], [c.name for c in present if c.role == "limit"])


def _pretty(name: str) -> str:
    return name.replace("_", " ")


def analogue_figure(core: CoreData, max_panels: int = 3):
    """Fossil-sample diagnostics (e.g. distance to the nearest modern analogue, share of
    taxa missing from the training set) against age, one panel per measure, with the
    limits the calibration stage wrote as horizontal lines (measures and limits as the
    run-folder schema declares them)."""
    diag = core.table("calibration_diagnostics")
    if diag is None or not len(diag):
        return None
    metrics, thresholds = diagnostic_columns(diag)
    if not metrics:
        return None
    varying = [m for m in metrics
               if pd.to_numeric(diag[m], errors="coerce").dropna().nunique() > 1]
    metrics = (varying or metrics[:1])[:max_panels]
    if "age_cal_bp" in diag.columns:
        ages = pd.to_numeric(diag["age_cal_bp"], errors="coerce").to_numpy(float)
        xlabel = "age [cal BP]"
    else:
        ages = sample_ages(core, diag["depth_cm"].to_numpy(float))
        xlabel = "age [cal BP] (median age at the sample depth)"
        if ages is None:
            ages = diag["depth_cm"].to_numpy(float)
            xlabel = "depth [cm]"
    groups = diag["proxy"].astype(str) if "proxy" in diag.columns else pd.Series(["samples"] * len(diag))
    fig, axes = style.new_figure(7.2, 1.1 + 1.55 * len(metrics), nrows=len(metrics), sharex=True,
                                 squeeze=False)
    axes = axes[:, 0]
    for ax, metric in zip(axes, metrics):
        values = pd.to_numeric(diag[metric], errors="coerce").to_numpy(float)
        for g, name in enumerate(sorted(groups.unique())):
            colour, ls, marker = style.SERIES_STYLES[g % len(style.SERIES_STYLES)]
            sel = (groups == name).to_numpy()
            order = np.argsort(ages[sel])
            ax.plot(ages[sel][order], values[sel][order], color=colour, linestyle=ls,
                    linewidth=0.8, marker=marker, markersize=3, markerfacecolor="white",
                    label=name)
        if ax is axes[0]:
            for t, column in enumerate(thresholds):
                level = pd.to_numeric(diag[column], errors="coerce").dropna()
                if level.empty:
                    continue
                ax.axhline(float(level.median()), color=style.INK,
                           linestyle=(":", "--", "-.")[t % 3], linewidth=0.8,
                           label=_pretty(column))
            ax.legend(loc="upper left", ncol=3)
        ax.set_ylabel(_pretty(metric))
    if xlabel.startswith("age"):
        style.age_axis(axes[-1], xlabel)
    else:
        axes[-1].set_xlabel(xlabel)
    axes[0].set_title(f"{core.core_id}: analogue quality through time")
    return fig
