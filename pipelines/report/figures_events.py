"""Event figures: the probability that an event is under way at each age, the onset
distribution of every detected event, and the lead/lag of events found in several cores."""

from __future__ import annotations

import numpy as np
import pandas as pd
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from pipelines.report import style
from pipelines.report.rundata import CoreData

__all__ = ["event_figure", "event_variables", "lead_lag_figure", "ONSET_SAMPLE_FILE"]

#: optional per-member onsets (event_id, onset_cal_bp); drawn as densities when present
ONSET_SAMPLE_FILE = "event_onsets"


def event_variables(core: CoreData) -> list[str]:
    """Variables with an event probability curve or detected events, in table order."""
    names: list[str] = []
    for key in ("event_probability", "events"):
        table = core.table(key)
        if table is not None:
            for value in table["variable"].astype(str).tolist():
                if value not in names:
                    names.append(value)
    return names


def _is_true(value) -> bool:
    return str(value).strip().lower() in ("true", "1", "yes", "1.0")


def _onset_density(samples: pd.DataFrame | None, event_id) -> tuple[np.ndarray, np.ndarray] | None:
    if samples is None or "event_id" not in samples.columns or "onset_cal_bp" not in samples.columns:
        return None
    values = pd.to_numeric(samples.loc[samples["event_id"].astype(str) == str(event_id),
                                       "onset_cal_bp"], errors="coerce").dropna().to_numpy(float)
    if values.size < 5:
        return None
    counts, edges = np.histogram(values, bins=min(40, max(8, values.size // 10)))
    return 0.5 * (edges[1:] + edges[:-1]), counts / counts.max()


def event_figure(core: CoreData, variable: str):
    """Event probability through time (top) and the onsets of the detected events (bottom).

    Each event is a lane: a bar over the 95 % onset range (solid when the event is
    significant against red-noise surrogates, hatched otherwise), a diamond at the median
    onset and, when per-member onsets are stored, their density above the bar.
    """
    prob = core.table("event_probability")
    events = core.table("events")
    if prob is not None:
        prob = prob[prob["variable"].astype(str) == variable].sort_values("age_cal_bp")
    if events is not None:
        events = events[events["variable"].astype(str) == variable]
    has_prob = prob is not None and not prob.empty
    has_events = events is not None and not events.empty
    if not has_prob and not has_events:
        return None
    rows = (1 if has_prob else 0) + (1 if has_events else 0)
    n_events = len(events) if has_events else 0
    ratios = ([2.2] if has_prob else []) + ([0.6 + 0.45 * n_events] if has_events else [])
    fig, axes = style.new_figure(7.2, 0.9 + 1.1 * sum(ratios), nrows=rows, sharex=True,
                                 squeeze=False, height_ratios=ratios)
    axes = list(axes[:, 0])
    if has_prob:
        ax = axes[0]
        age = prob["age_cal_bp"].to_numpy(float)
        p = pd.to_numeric(prob["probability"], errors="coerce").to_numpy(float)
        ax.fill_between(age, 0, p, color=style.MOSS, alpha=0.55, linewidth=0)
        ax.plot(age, p, color=style.INK, linewidth=0.9)
        ax.set_ylim(0, 1.02)
        if not has_events and not np.nanmax(p, initial=0.0) > 0:
            ax.text(0.5, 0.55, "no event found in any ensemble member", transform=ax.transAxes,
                    ha="center", color=style.INK, fontsize=8.5)
        ax.set_ylabel("event probability [0–1]")
        ax.set_title(f"{core.core_id}: events in {variable}")
    if has_events:
        axe = axes[-1]
        samples = core.table(ONSET_SAMPLE_FILE)
        labels = []
        for lane, row in enumerate(events.reset_index(drop=True).itertuples(index=False)):
            significant = _is_true(getattr(row, "significant", False))
            low, high = float(row.onset_q025), float(row.onset_q975)
            if significant:
                axe.barh(lane, high - low, left=low, height=0.42, color=style.SLATE)
            else:
                axe.barh(lane, high - low, left=low, height=0.42, facecolor="white",
                         edgecolor=style.SLATE, hatch="////", linewidth=0.8)
            axe.plot([float(row.onset_median)], [lane], marker="D", markersize=5,
                     markerfacecolor=style.CLAY, markeredgecolor=style.INK, linestyle="none")
            density = _onset_density(samples, getattr(row, "event_id", lane))
            if density is not None:
                centres, height = density
                axe.fill_between(centres, lane - 0.21, lane - 0.21 - 0.35 * height,
                                 step="mid", color=style.CLAY, alpha=0.5, linewidth=0)
            kind = str(getattr(row, "kind", "event"))
            probability = getattr(row, "probability", np.nan)
            text = f"{kind}"
            if probability is not None and np.isfinite(float(probability)):
                text += f", p(event) = {float(probability):.2f}"
            labels.append(text)
        axe.set_yticks(range(len(labels)), labels)
        axe.set_ylim(len(labels) - 0.4, -0.75)
        axe.grid(axis="y", visible=False)
        axe.set_ylabel("onset")
        handles = [Patch(color=style.SLATE, label="95 % onset range, significant"),
                   Patch(facecolor="white", edgecolor=style.SLATE, hatch="////",
                         label="95 % onset range, not significant"),
                   Line2D([], [], marker="D", linestyle="none", markerfacecolor=style.CLAY,
                          markeredgecolor=style.INK, label="median onset")]
        fig.legend(handles=handles, loc="outside lower center", ncol=3)
        if not has_prob:
            axe.set_title(f"{core.core_id}: events in {variable}")
    style.age_axis(axes[-1])
    return fig


def lead_lag_figure(lead_lag: pd.DataFrame | None):
    """One lane per pair of cores sharing an event: the 95 % range of ``onset_a - onset_b``
    as a bar, its median as a diamond, zero (no lead) as a dotted line; the lane label gives
    the probability that core a leads."""
    if lead_lag is None or not len(lead_lag):
        return None
    rows = lead_lag.reset_index(drop=True)
    fig, ax = style.new_figure(7.2, 1.2 + 0.42 * len(rows))
    labels = []
    for lane, row in enumerate(rows.itertuples(index=False)):
        low, high = float(row.lag_q025_yr), float(row.lag_q975_yr)
        ax.barh(lane, max(high - low, 1e-9), left=low, height=0.42, color=style.SLATE)
        ax.plot([float(row.lag_median_yr)], [lane], marker="D", markersize=5, markerfacecolor=style.CLAY,
                markeredgecolor=style.INK, linestyle="none")
        labels.append(f"{row.core_a} vs {row.core_b} ({row.variable} {row.kind}), "
                      f"P(a leads) = {float(row.probability_a_leads):.2f}")
    ax.axvline(0.0, color=style.INK, linewidth=0.8, linestyle=":")
    ax.set_yticks(range(len(labels)), labels)
    ax.set_ylim(len(labels) - 0.4, -0.6)
    ax.grid(axis="y", visible=False)
    ax.set_xlabel("lag: onset in core a minus onset in core b [yr]; positive = core a leads")
    ax.set_title("lead/lag of events found in several cores (95 % range, median)")
    return fig
