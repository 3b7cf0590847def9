"""Validation of core tables that have already been read (``core.toml``: :mod:`.core_file`).

Every check here is pure (no file I/O) and collects *all* problems instead of stopping at the
first: each function returns the converted value (or ``None`` when it cannot be built) and a
list of :class:`~proxies.problems.Problem`, each naming the file, the row (1-based, header = 1)
and column or key where there is one, what is wrong and how to fix it.

Tables arrive as read by :func:`pipelines.tables.read_table`: cells as read (text, numbers or
``None``), index = file row. The checks convert depth units to cm and section depths to
composite depth, never reorder or drop rows, and never change a value except for that unit
conversion.

Range rules and why
-------------------
- radiocarbon ages: -1000 to 55 000 14C yr BP. Negative ages down to -1000 (F14C ~ 1.13) are
  allowed for slightly post-bomb material; the practical radiocarbon limit is about 50-55 kyr
  (common practice). Older or strongly post-bomb material should be given as ``calendar``.
- calendar ages [cal BP] may be negative (after 1950 CE) but not younger than the core top
  (``1950 - collected``) by more than :data:`CALENDAR_TOP_SLACK_YR` years, nor older than
  :data:`CALENDAR_MAX_CAL_BP` (a 5e8 typed for 5e3 would otherwise drag every other date).
- errors > 0; thicknesses, counts and proxy errors >= 0; depths >= 0.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pandas as pd

from proxies.cores.cells import BadCell, cell_to_float, cell_to_text, parse_bool  # noqa: F401 (re-export)
from proxies.cores.curve_names import check_curve_names, resolve_curve_name  # noqa: F401 (re-export)
from proxies.cores.core_file import (  # noqa: F401 (re-exported names of the core.toml rules)
    ARCHIVES, CORE_KEYS, DEPTH_UNITS, FILE_KEYS, ID_PATTERN, TOP_LEVEL_KEYS, CoreSpec, check_core_mapping, current_year)
from proxies.cores.depth import Section
from proxies.cores.model import ERROR_SUFFIX
from proxies.problems import Problem
from proxies.settings_spec import did_you_mean

__all__ = [
    "ARCHIVES",
    "DATE_KINDS",
    "DEPTH_UNITS",
    "TEXT_COLUMNS",
    "CoreSpec",
    "current_year",
    "check_core_mapping",
    "check_samples",
    "check_dates",
    "check_counts",
    "check_curve_names",
    "resolve_curve_name",
    "check_measurements",
    "parse_bool",
]

DATE_KINDS = ("radiocarbon", "calendar")
#: columns kept as text in samples and counts (every other column must be numeric)
TEXT_COLUMNS = frozenset({"label", "sample_id", "sample", "lab_id", "note", "notes", "comment", "comments"})
#: post-bomb ages (F14C up to ~3.5) are accepted; they need a post-bomb curve in [curves]
RADIOCARBON_MIN_14C_YR = -10000.0
RADIOCARBON_MAX_14C_YR = 55000.0
#: oldest accepted calendar age [cal BP] (10 Myr: far beyond any core this program dates)
CALENDAR_MAX_CAL_BP = 10_000_000.0
#: a calendar age may be this many years younger than the core top [yr]
CALENDAR_TOP_SLACK_YR = 5.0


# ---------------------------------------------------------------------------------------------
# cells
# ---------------------------------------------------------------------------------------------
#: columns the dates table knows (besides depth and thickness in the core's unit)
DATES_COLUMNS = ("label", "kind", "age", "error", "curve", "reservoir_offset", "reservoir_error", "exclude",
                 "section")


def _misspelt_column(checker, column: str, known: tuple[str, ...], exact_case: bool = False) -> None:
    """A column that is a known column written differently would be read as something else
    (an extra text column, a proxy): refuse it with the name to use."""
    if column in known or column in TEXT_COLUMNS:
        return
    lowered = column.lower().replace(" ", "_")
    near = next((k for k in known if k == lowered), None)
    if near is None and not exact_case:
        hint = did_you_mean(column, known)
        near = hint.split("'")[1] if hint and difflib_ratio(column, hint.split("'")[1]) >= 0.8 else None
    if near is not None:
        checker.add(f"column '{column}' looks like '{near}' but is not spelt so: it would not be read as "
                    f"'{near}'", f"rename the column to '{near}'", row=1, column=column)


def difflib_ratio(a: str, b: str) -> float:
    import difflib

    return difflib.SequenceMatcher(None, a, b).ratio()


def _near_column(wanted: str, header: list[str]) -> str | None:
    """A header name that is ``wanted`` written differently (case, blanks, a typo)."""
    for name in header:
        if name.lower().replace(" ", "_") == wanted:
            return name
    close = did_you_mean(wanted, header)
    return close.split("'")[1] if close else None


class _TableChecker:
    """Column conversions for one table, collecting problems with file rows."""

    def __init__(self, table: pd.DataFrame, file: str, factor: float, unit: str):
        self.table = table
        self.file = file
        self.factor = factor
        self.unit = unit
        self.rows = [int(r) for r in table.index]
        self.problems: list[Problem] = []

    def add(self, message: str, fix: str, row: int | None = None, column: str | None = None) -> None:
        self.problems.append(Problem(self.file, message, fix, row=row, column=column))

    def has(self, column: str) -> bool:
        return column in self.table.columns

    def require(self, columns: list[str]) -> bool:
        ok = True
        for column in columns:
            if not self.has(column):
                fix = f"add the column '{column}' to the header"
                near = _near_column(column, [str(c) for c in self.table.columns])
                if near:
                    fix = f"the header has '{near}': rename it to '{column}' (names are exact, lower case)"
                stem = column.rsplit("_", 1)[0] if column.startswith(("depth_", "thickness_")) else None
                if stem:
                    other = [c for c in self.table.columns if str(c).startswith(stem + "_")]
                    if other:
                        fix = (f"the table has '{other[0]}' but core.toml says depth_unit = '{self.unit}': "
                               f"rename the column to '{column}' or change depth_unit")
                self.add(f"required column '{column}' is missing", fix, row=1, column=column)
                ok = False
        return ok

    def numbers(
        self, column: str, *, required_cells: bool = False, lo: float | None = None,
        lo_inclusive: bool = True, what: str = "value", fix: str = "",
    ) -> np.ndarray:
        values = np.full(len(self.rows), np.nan)
        if not self.has(column):
            return values
        for i, (row, cell) in enumerate(zip(self.rows, self.table[column])):
            try:
                value = cell_to_float(cell)
            except BadCell as reason:
                self.add(f"{reason}", fix or f"write the {what} as a plain number (decimal point)", row, column)
                continue
            if math.isnan(value):
                if required_cells:
                    self.add(f"the {what} is missing", f"fill in the {what} or remove the row", row, column)
                continue
            if lo is not None and (value < lo or (value == lo and not lo_inclusive)):
                relation = ">=" if lo_inclusive else ">"
                self.add(f"{what} {value:g} must be {relation} {lo:g}", fix or f"correct the {what}", row, column)
                continue
            values[i] = value
        return values

    def texts(self, column: str) -> list[str | None]:
        if not self.has(column):
            return [None] * len(self.rows)
        return [cell_to_text(cell) for cell in self.table[column]]

    def depths(self, sections: tuple[Section, ...], kind: str) -> tuple[np.ndarray, np.ndarray | None, list]:
        """Composite depth [cm], section depth [cm] (or None) and section names."""
        column = f"depth_{self.unit}"
        raw = self.numbers(column, required_cells=True, lo=0.0, what="depth")
        depth_cm = raw * self.factor
        names = self.texts("section")
        if not sections:
            if self.has("section"):
                self.add("the table has a 'section' column but core.toml lists no [[sections]]",
                         "add [[sections]] with name and top to core.toml, or remove the column",
                         row=1, column="section")
            return depth_cm, None, names
        if not self.has("section"):
            self.add("core.toml lists [[sections]] but the table has no 'section' column",
                     f"add a 'section' column naming each {kind}'s section", row=1, column="section")
            return depth_cm, None, names
        tops = {s.name: s.top_cm for s in sections}
        composite = np.full(len(self.rows), np.nan)
        for i, (row, name) in enumerate(zip(self.rows, names)):
            if name is None:
                self.add("the section is missing", "name the section of this row", row, "section")
            elif name not in tops:
                self.add(f"unknown section {name!r}",
                         "use a section listed in core.toml [[sections]]: " + ", ".join(tops), row, "section")
            else:
                composite[i] = tops[name] + depth_cm[i]
                self._overlap(sections, name, composite[i], row)
        return composite, depth_cm, names

    def _overlap(self, sections: tuple[Section, ...], name: str, composite_cm: float, row: int) -> None:
        """A row of one section lying at or below the top of the next section down."""
        ordered = sorted(sections, key=lambda s: s.top_cm)
        index = next(i for i, s in enumerate(ordered) if s.name == name)
        if index + 1 < len(ordered) and composite_cm >= ordered[index + 1].top_cm:
            below = ordered[index + 1]
            self.add(f"this row of section {name!r} lies at composite depth {composite_cm:g} cm, at or below the "
                     f"top of section {below.name!r} ({below.top_cm:g} cm): the sections overlap",
                     "correct the section tops in core.toml [[sections]] or the row's section depth",
                     row, f"depth_{self.unit}")

    def unique_depths(self, depth_cm: np.ndarray, column: str) -> None:
        first: dict[float, int] = {}
        for row, depth in zip(self.rows, depth_cm):
            if math.isnan(depth):
                continue
            key = round(float(depth), 9)
            if key in first:
                self.add(f"composite depth {depth:g} cm is also on row {first[key]}",
                         "each depth must appear once: remove or correct the duplicate", row, column)
            else:
                first[key] = row


def _table_frame(columns: dict[str, Any], source_rows: list[int]) -> pd.DataFrame:
    # lists are text (or as-read) columns: keep them as objects so missing stays None
    frame = pd.DataFrame(
        {name: pd.Series(values, dtype=object) if isinstance(values, list) else values
         for name, values in columns.items()}
    )
    frame["source_row"] = np.asarray(source_rows, dtype=np.int64)
    return frame.reset_index(drop=True)


def _numeric_columns_with_layout(
    checker: _TableChecker, spec: CoreSpec, depth_cm: np.ndarray, section_depth: np.ndarray | None,
    *, value_name: str, value_lo_inclusive: bool = True, errors_allowed: bool,
) -> tuple[dict[str, Any], list[str]]:
    """Build output columns in file order; returns (columns, value column names)."""
    depth_column = f"depth_{spec.depth_unit}"
    thickness_column = f"thickness_{spec.depth_unit}"
    out: dict[str, Any] = {}
    values: list[str] = []
    for column in checker.table.columns:
        if column not in (depth_column, thickness_column):
            _misspelt_column(checker, column, (depth_column, thickness_column, "section"), exact_case=True)
        if column == depth_column:
            out["depth_cm"] = depth_cm
            if section_depth is not None:
                out["section_depth_cm"] = section_depth
        elif column == thickness_column:
            out["thickness_cm"] = checker.numbers(column, lo=0.0, what="thickness") * spec.depth_factor
        elif column == "section":
            out["section"] = checker.texts(column)
        elif column in TEXT_COLUMNS:
            out[column] = checker.texts(column)
        elif column in ("depth_cm", "thickness_cm", "section_depth_cm", "source_row"):
            checker.add(f"column name '{column}' is reserved here",
                        "rename the column (depth columns follow core.toml depth_unit)", row=1, column=column)
        elif errors_allowed and column.endswith(ERROR_SUFFIX):
            out[column] = checker.numbers(column, lo=0.0, what="analytical error")
            if column[: -len(ERROR_SUFFIX)] not in checker.table.columns:
                checker.add(f"error column '{column}' has no proxy column '{column[: -len(ERROR_SUFFIX)]}'",
                            "rename it to <proxy>_error after an existing proxy column", row=1, column=column)
        else:
            out[column] = checker.numbers(column, lo=0.0 if value_name == "count" else None,
                                          what=value_name)
            values.append(column)
    return out, values


# ---------------------------------------------------------------------------------------------
# tables
# ---------------------------------------------------------------------------------------------
def check_samples(table: pd.DataFrame, file: str, spec: CoreSpec) -> tuple[pd.DataFrame | None, list[Problem]]:
    """Validate and convert the samples table (depth to composite cm, proxies to float).

    Rules: ``depth_<unit>`` present, numeric, >= 0 and unique (as composite depth);
    ``thickness_<unit>`` >= 0; every proxy cell numeric or empty; ``<proxy>_error`` >= 0 and
    belonging to a proxy column; ``section`` naming a known section when core.toml has
    [[sections]]. Text columns are only those in :data:`TEXT_COLUMNS`. (A core needs proxy
    columns or a counts table: :func:`check_measurements`.)
    """
    return _checked_depth_table(table, file, spec, "sample", "proxy value", errors_allowed=True)


def check_counts(table: pd.DataFrame, file: str, spec: CoreSpec) -> tuple[pd.DataFrame | None, list[Problem]]:
    """Validate and convert the counts table: depth as for samples, taxa counts >= 0."""
    return _checked_depth_table(table, file, spec, "count", "count", errors_allowed=False,
                                needs_values="the counts table has no taxon column",
                                fix="add one column of counts per taxon")


def _checked_depth_table(table: pd.DataFrame, file: str, spec: CoreSpec, noun: str, value_name: str, *,
                         errors_allowed: bool, needs_values: str = "",
                         fix: str = "") -> tuple[pd.DataFrame | None, list[Problem]]:
    """A depth-indexed table of numeric columns checked and converted (samples, counts):
    ``depth_<unit>`` required, depths to composite cm and unique, every other column numeric;
    ``needs_values``: the problem when it has no value column (with its ``fix``)."""
    checker = _TableChecker(table, file, spec.depth_factor, spec.depth_unit)
    if not checker.require([f"depth_{spec.depth_unit}"]):
        return None, checker.problems
    depth_cm, section_depth, _ = checker.depths(spec.sections, noun)
    checker.unique_depths(depth_cm, f"depth_{spec.depth_unit}")
    columns, values = _numeric_columns_with_layout(
        checker, spec, depth_cm, section_depth, value_name=value_name, errors_allowed=errors_allowed
    )
    if needs_values and not values:
        checker.add(needs_values, fix, row=1)
    if checker.problems:
        return None, checker.problems
    return _table_frame(columns, checker.rows), []


def check_measurements(samples: pd.DataFrame, counts: pd.DataFrame | None, file: str) -> list[Problem]:
    """A core needs something to reconstruct: a proxy column in samples or a counts table."""
    from proxies.cores.model import _value_columns

    if counts is None and not _value_columns(samples):
        return [Problem(file, "the samples table has no proxy column and the core has no counts table",
                        "add one numeric column per proxy (e.g. uk37, d18o_permil), or a counts table",
                        row=1)]
    return []


def check_dates(table: pd.DataFrame, file: str, spec: CoreSpec) -> tuple[pd.DataFrame | None, list[Problem]]:
    """Validate and convert the dates table.

    Rules: ``label`` unique and present; ``depth_<unit>`` >= 0; ``kind`` radiocarbon or
    calendar (any case); ``age`` within the ranges in the module notes; ``error`` > 0;
    ``thickness_<unit>`` >= 0 with the slice (depth +- thickness / 2) below the core top;
    ``reservoir_error`` >= 0; ``exclude`` a true/false word. Dates deeper than the deepest sample are fine. Extra columns are kept as read.
    """
    depth_column = f"depth_{spec.depth_unit}"
    checker = _TableChecker(table, file, spec.depth_factor, spec.depth_unit)
    if not checker.require(["label", depth_column, "kind", "age", "error"]):
        return None, checker.problems
    labels = checker.texts("label")
    first_label: dict[str, int] = {}
    for row, label in zip(checker.rows, labels):
        if label is None:
            checker.add("the label is missing", "give every date a unique label (e.g. its lab code)", row, "label")
        elif label in first_label:
            checker.add(f"label {label!r} is also on row {first_label[label]}",
                        "give every date a unique label", row, "label")
        else:
            first_label[label] = row
    depth_cm, section_depth, _ = checker.depths(spec.sections, "date")
    kinds = []
    for row, kind in zip(checker.rows, checker.texts("kind")):
        normal = kind.lower() if kind else None
        if normal not in DATE_KINDS:
            hint = did_you_mean(kind, DATE_KINDS) if kind else ""
            checker.add(f"unknown date kind {kind!r}" + (f" ({hint})" if hint else ""),
                        "use radiocarbon or calendar", row, "kind")
        kinds.append(normal)
    ages = checker.numbers("age", required_cells=True, what="age")
    errors = checker.numbers("error", required_cells=True, lo=0.0, lo_inclusive=False, what="age error",
                             fix="give the 1-sigma age error as a positive number")
    _check_age_ranges(checker, kinds, ages, spec)
    out: dict[str, Any] = {}
    for column in table.columns:
        if column == "label":
            out["label"] = labels
        elif column == depth_column:
            out["depth_cm"] = depth_cm
            if section_depth is not None:
                out["section_depth_cm"] = section_depth
        elif column == f"thickness_{spec.depth_unit}":
            out["thickness_cm"] = _date_thickness(checker, column, depth_cm, spec)
        elif column == "kind":
            out["kind"] = kinds
        elif column == "age":
            out["age"] = ages
        elif column == "error":
            out["error"] = errors
        elif column == "reservoir_offset":
            out[column] = checker.numbers(column, what="reservoir offset")
        elif column == "reservoir_error":
            out[column] = checker.numbers(column, lo=0.0, what="reservoir error")
        elif column == "exclude":
            out[column] = _exclude_column(checker)
        elif column in ("section", "curve"):
            out[column] = checker.texts(column)
        elif column in ("depth_cm", "thickness_cm", "source_row", "section_depth_cm"):
            checker.add(f"column name '{column}' is reserved here",
                        "rename the column (depth columns follow core.toml depth_unit)", row=1, column=column)
        else:
            _misspelt_column(checker, column, DATES_COLUMNS + (depth_column, f"thickness_{spec.depth_unit}"))
            out[column] = list(table[column])
    if checker.problems:
        return None, checker.problems
    n = len(checker.rows)
    out.setdefault("thickness_cm", np.zeros(n))
    out.setdefault("curve", [None] * n)
    out.setdefault("reservoir_offset", np.zeros(n))
    out.setdefault("reservoir_error", np.zeros(n))
    out.setdefault("exclude", [False] * n)
    frame = _table_frame(out, checker.rows)
    frame["reservoir_offset"] = frame["reservoir_offset"].fillna(0.0)
    frame["reservoir_error"] = frame["reservoir_error"].fillna(0.0)
    frame["thickness_cm"] = frame["thickness_cm"].fillna(0.0)
    frame["exclude"] = frame["exclude"].astype(bool)
    return frame, []


def _date_thickness(checker: _TableChecker, column: str, depth_cm: np.ndarray, spec: CoreSpec) -> np.ndarray:
    """Thickness of each dated slice [cm]: >= 0, and the slice (depth +- thickness / 2) below the top."""
    thickness = checker.numbers(column, lo=0.0, what="thickness",
                                fix="give the thickness of the dated slice as a number >= 0 (0 or empty: a point)")
    thickness_cm = thickness * spec.depth_factor
    for row, depth, value, raw in zip(checker.rows, depth_cm, thickness_cm, thickness):
        if np.isfinite(depth) and np.isfinite(value) and depth - value / 2 < -1e-9:
            checker.add(f"the dated slice ({raw:g} thick around depth {depth / spec.depth_factor:g}) reaches above "
                        "the core top (depth - thickness / 2 < 0)",
                        "the depth is the slice's centre: give at most twice the depth as thickness, or "
                        "correct the depth", row, column)
    return thickness_cm


def _exclude_column(checker: _TableChecker) -> list[bool]:
    result = []
    for row, cell in zip(checker.rows, checker.table["exclude"]):
        value = parse_bool(cell)
        if value is None:
            checker.add(f"{cell!r} is not a true/false value", "write true/false, yes/no or 1/0 (empty = false)",
                        row, "exclude")
            value = False
        result.append(value)
    return result


def _check_age_ranges(checker: _TableChecker, kinds: list, ages: np.ndarray, spec: CoreSpec) -> None:
    youngest = spec.top_age_cal_bp - CALENDAR_TOP_SLACK_YR
    for row, kind, age in zip(checker.rows, kinds, ages):
        if math.isnan(age):
            continue
        if kind == "radiocarbon" and not RADIOCARBON_MIN_14C_YR <= age <= RADIOCARBON_MAX_14C_YR:
            checker.add(
                f"radiocarbon age {age:g} 14C yr BP is outside {RADIOCARBON_MIN_14C_YR:g} to "
                f"{RADIOCARBON_MAX_14C_YR:g}",
                "check the age; give strongly post-bomb or beyond-limit ages as kind = calendar",
                row, "age",
            )
        elif kind == "calendar" and age > CALENDAR_MAX_CAL_BP:
            checker.add(
                f"calendar age {age:g} cal BP is beyond {CALENDAR_MAX_CAL_BP:g} cal BP, older than any "
                "sediment this program dates", "check the age and its unit (cal BP = years before 1950 CE, "
                "not ka or Ma)", row, "age",
            )
        elif kind == "calendar" and age < youngest:
            checker.add(
                f"calendar age {age:g} cal BP is younger than the core top "
                f"({spec.top_age_cal_bp:g} cal BP = {spec.collected_ce} CE)",
                "give calendar ages in cal BP (years before 1950 CE; 1950 - year CE)", row, "age",
            )
