"""The optional ``lead210`` table of a core folder: 210Pb (and 226Ra) activity by depth.

Columns: depth (``depth_cm``, or the core's depth unit; the sample's mid-depth), 
``dry_mass_g_cm2`` (cumulative dry mass from the surface to the sample's mid-depth, g cm-2),
``pb210_bq_kg`` and ``pb210_error`` (total 210Pb activity and its 1-sigma error, Bq kg-1),
optional ``ra226_bq_kg`` and ``ra226_error`` (226Ra, i.e. supported 210Pb). Rows must be in
depth order (depths and cumulative dry mass increasing), activities >= 0, errors > 0. Every
problem names the file, row and column and says how to fix it; nothing is dated half-way.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from proxies.problems import Problem

__all__ = ["LEAD210_COLUMNS", "check_lead210"]

#: required activity columns (besides the depth)
LEAD210_COLUMNS = ("dry_mass_g_cm2", "pb210_bq_kg", "pb210_error")
OPTIONAL = ("ra226_bq_kg", "ra226_error")


def check_lead210(table: pd.DataFrame, file: str, spec) -> tuple[pd.DataFrame | None, list[Problem]]:
    """Validate and convert the lead210 table (depth to cm); ``(None, problems)`` when bad."""
    from proxies.cores.validation import _TableChecker

    depth_column = f"depth_{spec.depth_unit}"
    checker = _TableChecker(table, file, spec.depth_factor, spec.depth_unit)
    if not checker.require([depth_column, *LEAD210_COLUMNS]):
        return None, checker.problems
    depth = checker.numbers(depth_column, required_cells=True, lo=0, what="depth") * spec.depth_factor
    mass = checker.numbers("dry_mass_g_cm2", required_cells=True, lo=0, what="cumulative dry mass")
    activity_fix = "activities are >= 0 Bq/kg; check the value and its units (a negative value is not a measurement)"
    columns = {"depth_cm": depth, "dry_mass_g_cm2": mass,
               "pb210_bq_kg": checker.numbers("pb210_bq_kg", required_cells=True, lo=0, what="210Pb activity",
                                              fix=activity_fix),
               "pb210_error": checker.numbers("pb210_error", required_cells=True, lo=0, lo_inclusive=False,
                                              what="210Pb error")}
    for name in OPTIONAL:
        if checker.has(name):
            columns[name] = checker.numbers(name, required_cells=True, lo=0, lo_inclusive=name != "ra226_error",
                                            what=name.replace("_", " "), fix=activity_fix)
    for values, column, what in ((depth, depth_column, "depth"), (mass, "dry_mass_g_cm2", "cumulative dry mass")):
        steps = np.diff(values)
        for k in np.flatnonzero(~(steps > 0) & np.isfinite(steps)):
            checker.add(f"{what} {values[k + 1]:g} does not increase from the row above ({values[k]:g})",
                        "sort the rows by depth, top first; each row is one sample below the previous",
                        checker.rows[k + 1], column)
    if len(table) < 4:
        checker.add(f"only {len(table)} samples", "210Pb dating needs at least 4 samples down to the background",
                    row=1)
    if checker.problems:
        return None, checker.problems
    frame = pd.DataFrame(columns)
    frame["source_row"] = checker.rows
    return frame, []
