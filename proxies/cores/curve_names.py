"""Which calibration curve a date uses: the one rule shared by ``check`` and ``run``, and the
problems of dates whose curve the run config does not define."""

from __future__ import annotations

from typing import Any

import pandas as pd

from proxies.chronology.curve_cells import BLEND_PREFIX, curve_cell_problem
from proxies.cores.cells import cell_to_text
from proxies.problems import Problem
from proxies.settings_spec import did_you_mean

__all__ = ["resolve_curve_name", "check_curve_names"]


def resolve_curve_name(cell: Any, default_curve: str | None, curve_names) -> str | None:
    """The curve a radiocarbon date is calibrated with -- the one rule of ``check`` and ``run``.

    The date's own ``curve`` cell when filled; else ``[chronology] default_curve``; else the
    only curve of ``[curves]``; else the one named ``atmosphere``; else ``None`` (no curve).
    """
    text = cell_to_text(cell) if not isinstance(cell, str) else cell.strip()
    if text:
        return text
    if default_curve:
        return default_curve
    names = list(curve_names)
    if len(names) == 1:
        return names[0]
    if "atmosphere" in names:
        return "atmosphere"
    return None


def check_curve_names(dates: pd.DataFrame, file: str, known: set[str] | dict,
                      default_curve: str | None = None) -> list[Problem]:
    """Problems for dates whose curve (by :func:`resolve_curve_name`) is not in ``[curves]``.

    Parameters
    ----------
    dates : DataFrame
        A converted dates table (with ``kind``, ``curve`` and ``source_row``).
    file : str
        How problems name the dates file.
    known : set of str
        Curve names defined in the run config.
    default_curve : str, optional
        ``[chronology] default_curve``.
    """
    problems = []
    names = sorted(known)
    for row, kind, cell in zip(dates["source_row"], dates["kind"], dates["curve"]):
        if kind != "radiocarbon" and cell_to_text(cell) is None:
            continue
        curve = resolve_curve_name(cell, default_curve, names)
        if curve is None:
            message = ("radiocarbon date but the run config has no [curves]" if not names else
                       "radiocarbon date with an empty curve cell, and the run config names no default: "
                       f"{len(names)} curves ({', '.join(names)}), none called 'atmosphere'")
            fix = ("add a calibration curve to [curves]" if not names else
                   "fill in the curve cell, or set [chronology] default_curve")
            problems.append(Problem(file, message, fix, row=int(row), column="curve"))
        elif curve.lower().startswith(BLEND_PREFIX):
            found = curve_cell_problem(curve, known)
            if found is not None:
                problems.append(Problem(file, found[0], found[1], row=int(row), column="curve"))
        elif curve not in known:
            hint = did_you_mean(curve, names)
            source = "[chronology] default_curve" if cell_to_text(cell) is None else "the curve cell"
            problems.append(Problem(
                file, f"unknown curve {curve!r} (from {source})" + (f" ({hint})" if hint else ""),
                ("use a curve named in the run config [curves]: " + ", ".join(names)) if names
                else "add the curve to the run config [curves]",
                row=int(row), column="curve",
            ))
    return problems
