"""Calibrate a core's radiocarbon dates on the curve (or blend of curves) each one names.

Dates are grouped by their curve choice (:mod:`proxies.chronology.curve_cells`) and each
group calibrated at once. A blend with an uncertain share is the average of the date's
calibrated densities over the share's quadrature points (a mixture over the share). A
post-bomb date (F14C > 1, a negative radiocarbon age) needs a curve that reaches after
1950 CE (cal BP below 0), e.g. a user-supplied post-bomb curve in the same five-column
layout; without one it is refused with a message naming its row.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from proxies.chronology.calibrate import CurveRangeError, average_calibrated, calibrate_radiocarbon
from proxies.chronology.curve_cells import CurveChoice, curve_cell_problem, parse_curve_cell, share_quadrature
from proxies.chronology.curves import CalibrationCurve, blend_curves
from proxies.cores.validation import resolve_curve_name
from proxies.problems import Problem

__all__ = ["curve_choice", "calibrate_radiocarbon_rows", "lead210_rows"]


def curve_choice(cell, settings, curves: dict) -> CurveChoice | None:
    """The curve choice of a date: its cell, else ``default_curve``, the only curve, or the one
    named ``atmosphere``; ``None`` when nothing applies. Malformed cells raise ``ValueError``."""
    name = resolve_curve_name(cell, settings.default_curve, curves)
    return None if name is None else parse_curve_cell(name)


def _curves_for(choice: CurveChoice, curves: dict, step: float) -> list[tuple[CalibrationCurve, float]]:
    """(curve on the calibration grid, weight) pairs of a choice."""
    if choice.admixture is None:
        return [(curves[choice.base].on_grid(step), 1.0)]
    shares, weights = share_quadrature(choice.share, choice.share_sd)
    return [(blend_curves(curves[choice.base], curves[choice.admixture], p, name=choice.key, step=step), w)
            for p, w in zip(shares, weights)]


def calibrate_radiocarbon_rows(table: pd.DataFrame, rows, curves: dict, settings, file: str, row_of):
    """Calibrate the radiocarbon dates at positions ``rows`` of ``table``.

    Returns
    -------
    parts : list of (positions, CalibratedDates)
    used : dict of position -> curve key (``curve_used``)
    problems : list of Problem
    """
    problems, groups, used = [], {}, {}
    for i in rows:
        label, row = table.at[i, "label"], row_of(i)
        try:
            choice = curve_choice(table.at[i, "curve"], settings, curves)
        except ValueError:
            message, fix = curve_cell_problem(table.at[i, "curve"], curves)
            problems.append(Problem(file, f"date {label!r}: {message}", fix, row=row, column="curve"))
            continue
        if choice is None:
            named = ", ".join(sorted(curves))
            problems.append(Problem(
                file, f"date {label!r} has an empty curve cell and "
                      + (f"the run config has {len(curves)} curves ({named}), none called 'atmosphere', and no "
                         "default_curve" if curves else "the run config has no [curves]"),
                "fill in the curve cell, or set [chronology] default_curve" if curves
                else "add a [curves] entry to the run config", row=row, column="curve"))
            continue
        found = curve_cell_problem(choice.key, curves)
        if found is not None:
            problems.append(Problem(file, f"date {label!r}: {found[0]}", found[1], row=row, column="curve"))
            continue
        groups.setdefault(choice.key, (choice, []))[1].append(int(i))
        used[int(i)] = choice.key
    parts = []
    for key, (choice, positions) in groups.items():
        positions = np.asarray(positions)
        ages = table["age"].to_numpy(float)[positions]
        errors = table["error"].to_numpy(float)[positions]
        young_end = min(curves[name].cal_range[0] for name in choice.names)
        lowest = min(float(curves[name].c14_age.min()) for name in choice.names)
        # post-bomb: F14C > 1 beyond 3 sigma (a negative age within its noise of 0 is a
        # pre-bomb sample measured near the top) and beyond the curve's youngest radiocarbon age
        # by more than 4 sigma
        post_bomb = (ages + 3 * errors < 0) & (ages + 4 * errors < lowest)
        if young_end >= 0 and post_bomb.any():
            for i in positions[post_bomb]:
                problems.append(Problem(
                    file, f"date {table.at[i, 'label']!r} is post-bomb (radiocarbon age {table.at[i, 'age']:g} "
                          f"14C yr BP, F14C > 1) but curve {key!r} has no post-bomb part (it starts at "
                          f"{young_end:g} cal BP)",
                    "list a post-bomb curve (five columns, cal BP below 0) in [curves] and name it in "
                    "this date's curve cell", row=row_of(i), column="curve"))
            positions = positions[~post_bomb]
            if not positions.size:
                continue
        part, range_problems = _calibrate_group(table, positions, _curves_for(choice, curves,
                                                                               settings.calibration_step_yr),
                                                settings, file, key, row_of)
        problems.extend(range_problems)
        if part is not None:
            parts.append((positions, part))
    return parts, used, problems


def _calibrate_group(table, positions, weighted_curves, settings, file, key, row_of):
    pieces, weights = [], []
    for curve, weight in weighted_curves:
        try:
            pieces.append(calibrate_radiocarbon(
                table["age"].to_numpy(float)[positions], table["error"].to_numpy(float)[positions], curve,
                table["reservoir_offset"].to_numpy(float)[positions],
                table["reservoir_error"].to_numpy(float)[positions], student_t=settings.student_t,
                error_multiplier_prior=settings.error_multiplier_prior,
                labels=table["label"].astype(str).to_numpy()[positions]))
        except CurveRangeError as error:
            low, high = curve.c14_range()
            return None, [Problem(
                file, f"radiocarbon age {table.at[positions[j], 'age']:g} of date {table.at[positions[j], 'label']!r} "
                      f"is outside curve {key!r} ({low:g}-{high:g} 14C yr BP)",
                "check the age and its reservoir offset, or use a curve that covers it",
                row=row_of(positions[j]), column="age") for j in error.index]
        weights.append(weight)
    if len(pieces) == 1:
        return pieces[0], []
    return average_calibrated(pieces, np.asarray(weights)), []


def lead210_rows(core, settings, columns, rng: np.random.Generator) -> pd.DataFrame:
    """The 210Pb ages of a core as calendar constraints (rows for the dates table).

    Each dated 210Pb sample becomes a calendar age ``1950 - collected + t`` [cal BP] with its
    Monte Carlo error (at least 1 yr), labelled ``210Pb <depth> cm``, a constraint (no
    outlier component). The Monte Carlo draws come from ``rng``.
    """
    from proxies.chronology.lead210 import lead210_ages

    ages = lead210_ages(core.lead210, settings.lead210_model, settings.lead210_draws, rng)
    rows = {c: [None] * len(ages) for c in columns}
    rows.update(label=[f"210Pb {d:g} cm" for d in ages["depth_cm"]], depth_cm=ages["depth_cm"].to_numpy(float),
                kind="calendar", age=core.top_age_cal_bp + ages["age_yr"].to_numpy(float),
                error=np.maximum(ages["error_yr"].to_numpy(float), 1.0), thickness_cm=0.0, reservoir_offset=0.0,
                reservoir_error=0.0, exclude=False, source_row=np.nan, constraint=True)
    return pd.DataFrame(rows)
