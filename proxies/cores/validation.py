"""Validation of core inputs that have already been read: ``core.toml`` mappings and tables.

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
  (``1950 - collected``) by more than :data:`CALENDAR_TOP_SLACK_YR` years.
- errors > 0; thicknesses, counts and proxy errors >= 0; depths >= 0.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from datetime import date
from typing import Any

import numpy as np
import pandas as pd

from proxies.cores.model import ERROR_SUFFIX, EventLayer, Section
from proxies.problems import Problem

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
    "check_measurements",
    "parse_bool",
]

ARCHIVES = ("lake", "marine", "peat", "speleothem", "other")
DATE_KINDS = ("radiocarbon", "calendar")
#: depth unit -> factor to cm
DEPTH_UNITS = {"cm": 1.0, "mm": 0.1, "m": 100.0}
#: columns kept as text in samples and counts (every other column must be numeric)
TEXT_COLUMNS = frozenset({"label", "sample_id", "sample", "lab_id", "note", "notes", "comment", "comments"})
#: text cells read as a missing value (besides empty cells)
MISSING_MARKERS = frozenset({"na", "nan", "n/a"})
RADIOCARBON_MIN_14C_YR = -1000.0
RADIOCARBON_MAX_14C_YR = 55000.0
#: a calendar age may be this many years younger than the core top [yr]
CALENDAR_TOP_SLACK_YR = 5.0
#: earliest accepted collection year [yr CE]
EARLIEST_COLLECTION_CE = 1850
ID_PATTERN = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_-]{0,63}$")
TOP_LEVEL_KEYS = ("core", "files", "sections", "event_layers", "hiatuses")
CORE_KEYS = ("id", "archive", "latitude", "longitude", "collected", "depth_unit", "site", "top_age_error",
             "top_intact")
FILE_KEYS = ("samples", "dates", "counts")
TRUE_WORDS = frozenset({"true", "yes", "1", "y"})
FALSE_WORDS = frozenset({"false", "no", "0", "n"})


def current_year() -> int:
    """This year [CE], from the system clock (injectable everywhere as ``current_year=``)."""
    return date.today().year


@dataclass(frozen=True)
class CoreSpec:
    """The contents of a valid ``core.toml``, depths already in cm.

    Attributes mirror :class:`proxies.cores.model.Core`; ``depth_unit`` is the unit the
    tables are written in, ``files`` maps ``samples``/``dates``/``counts`` to file names.
    """

    id: str
    archive: str
    latitude: float
    longitude: float
    collected_ce: int
    site: str
    top_age_error: float | None
    depth_unit: str
    files: dict[str, str]
    sections: tuple[Section, ...] = ()
    event_layers: tuple[EventLayer, ...] = ()
    hiatuses_cm: tuple[float, ...] = ()
    top_intact: bool | None = None

    @property
    def depth_factor(self) -> float:
        """Multiply a table depth by this to get cm."""
        return DEPTH_UNITS[self.depth_unit]

    @property
    def top_age_cal_bp(self) -> float:
        return 1950.0 - self.collected_ce


# ---------------------------------------------------------------------------------------------
# core.toml
# ---------------------------------------------------------------------------------------------
@dataclass
class _Collector:
    file: str
    problems: list[Problem] = field(default_factory=list)

    def add(self, message: str, fix: str, column: str | None = None, row: int | None = None) -> None:
        self.problems.append(Problem(self.file, message, fix, row=row, column=column))


def _is_number(value: Any) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value)


def _number(
    where: _Collector, table: dict, key: str, path: str, *, required: bool, lo: float | None = None,
    hi: float | None = None, unit: str = "", fix: str = "",
) -> float | None:
    if key not in table:
        if required:
            where.add(f"required key '{key}' is missing", fix or f"add {key} = <number> {unit}".rstrip(), path)
        return None
    value = table[key]
    if not _is_number(value):
        where.add(f"'{key}' must be a number, got {value!r}", fix or f"write {key} = <number>", path)
        return None
    if (lo is not None and value < lo) or (hi is not None and value > hi):
        bounds = f"{lo if lo is not None else '-inf'} to {hi if hi is not None else 'inf'}"
        where.add(f"'{key}' = {value} is outside {bounds} {unit}".rstrip(), fix or f"give {key} within {bounds}", path)
        return None
    return float(value)


def _text(where: _Collector, table: dict, key: str, path: str, *, required: bool) -> str | None:
    if key not in table:
        if required:
            where.add(f"required key '{key}' is missing", f'add {key} = "..."', path)
        return None
    value = table[key]
    if not isinstance(value, str):
        where.add(f"'{key}' must be text, got {value!r}", f'write {key} = "..." in quotes', path)
        return None
    return value


def _unknown_keys(where: _Collector, table: dict, allowed: tuple[str, ...], path: str) -> None:
    for key in table:
        if key not in allowed:
            where.add(
                f"unknown key '{key}'",
                "remove it or correct the spelling; allowed: " + ", ".join(allowed),
                f"{path}.{key}" if path else key,
            )


def _table(where: _Collector, mapping: dict, key: str, *, required: bool) -> dict:
    if key not in mapping:
        if required:
            where.add(f"the [{key}] table is missing", f"add a [{key}] table (see the core-folder format)", key)
        return {}
    value = mapping[key]
    if not isinstance(value, dict):
        where.add(f"'{key}' must be a [{key}] table", f"write it as a [{key}] table", key)
        return {}
    return value


def _array_of_tables(where: _Collector, mapping: dict, key: str) -> list[dict]:
    value = mapping.get(key, [])
    if not isinstance(value, list) or not all(isinstance(item, dict) for item in value):
        where.add(f"'{key}' must be a list of [[{key}]] tables", f"write each entry as a [[{key}]] table", key)
        return []
    return value


def check_core_mapping(
    mapping: dict, file: str, *, year: int | None = None
) -> tuple[CoreSpec | None, list[Problem]]:
    """Validate a parsed ``core.toml``.

    Parameters
    ----------
    mapping : dict
        The parsed TOML document.
    file : str
        How problems name the file.
    year : int, optional
        The current year [CE] (default: :func:`current_year`), for the "collected in the
        future" check.

    Returns
    -------
    spec : CoreSpec or None
        ``None`` when any problem was found.
    problems : list of Problem
    """
    year = current_year() if year is None else year
    where = _Collector(file)
    _unknown_keys(where, mapping, TOP_LEVEL_KEYS, "")
    core = _table(where, mapping, "core", required=True)
    _unknown_keys(where, core, CORE_KEYS, "core")

    core_id = _text(where, core, "id", "core.id", required=True)
    if core_id is not None and not ID_PATTERN.match(core_id):
        where.add(
            f"core id {core_id!r} is not safe as a folder name",
            "use 1-64 letters, digits, '-' or '_', starting with a letter or digit (e.g. TARN-2)",
            "core.id",
        )
        core_id = None
    archive = _text(where, core, "archive", "core.archive", required=True)
    if archive is not None and archive not in ARCHIVES:
        where.add(f"unknown archive {archive!r}", "use one of: " + ", ".join(ARCHIVES), "core.archive")
        archive = None
    latitude = _number(where, core, "latitude", "core.latitude", required=True, lo=-90, hi=90, unit="decimal degrees")
    longitude = _number(
        where, core, "longitude", "core.longitude", required=True, lo=-180, hi=180, unit="decimal degrees"
    )
    collected = _collected_year(where, core, year)
    depth_unit = core.get("depth_unit", "cm")
    if depth_unit not in DEPTH_UNITS:
        where.add(
            f"unknown depth_unit {depth_unit!r}", "use one of: " + ", ".join(DEPTH_UNITS), "core.depth_unit"
        )
        depth_unit = None
    site = _text(where, core, "site", "core.site", required=False) or ""
    top_age_error = _number(where, core, "top_age_error", "core.top_age_error", required=False, lo=0, unit="yr")
    top_intact = _top_intact(where, core)

    files = _check_files(where, _table(where, mapping, "files", required=True))
    factor = DEPTH_UNITS.get(depth_unit or "cm", 1.0)
    unit = depth_unit or "cm"
    sections = _check_sections(where, _array_of_tables(where, mapping, "sections"), factor, unit)
    layers = _check_event_layers(where, _array_of_tables(where, mapping, "event_layers"), factor, unit)
    hiatuses = _check_hiatuses(where, _array_of_tables(where, mapping, "hiatuses"), factor, unit, layers)

    if where.problems:
        return None, where.problems
    spec = CoreSpec(
        id=core_id, archive=archive, latitude=latitude, longitude=longitude, collected_ce=collected,
        site=site, top_age_error=top_age_error, depth_unit=depth_unit, files=files,
        sections=sections, event_layers=tuple(sorted(layers, key=lambda e: e.top_cm)),
        hiatuses_cm=tuple(sorted(hiatuses)), top_intact=top_intact,
    )
    return spec, []


def _top_intact(where: _Collector, core: dict) -> bool | None:
    """``top_intact``: whether the core top is the sediment surface of the collection year."""
    if "top_intact" not in core:
        return None
    value = core["top_intact"]
    if not isinstance(value, bool):
        where.add(f"'top_intact' must be true or false, got {value!r}",
                  "write top_intact = false for a lost or older top (piston core, truncated sequence), "
                  "or leave it out", "core.top_intact")
        return None
    return value


def _collected_year(where: _Collector, core: dict, year: int) -> int | None:
    if "collected" not in core:
        where.add("required key 'collected' is missing", "add collected = <year CE the core was taken>",
                  "core.collected")
        return None
    value = core["collected"]
    if isinstance(value, bool) or not isinstance(value, int):
        where.add(f"'collected' must be a whole year CE, got {value!r}", "write e.g. collected = 2018",
                  "core.collected")
        return None
    if value > year:
        where.add(f"collected = {value} is in the future (this is {year})",
                  "give the year CE the core was taken", "core.collected")
        return None
    if value < EARLIEST_COLLECTION_CE:
        where.add(f"collected = {value} is before {EARLIEST_COLLECTION_CE} CE",
                  "give the year CE the core was taken (not an age in BP)", "core.collected")
        return None
    return value


def _check_files(where: _Collector, files: dict) -> dict[str, str]:
    _unknown_keys(where, files, FILE_KEYS, "files")
    result = {}
    for key in FILE_KEYS:
        name = _text(where, files, key, f"files.{key}", required=key != "counts")
        if name is None:
            continue
        parts = re.split(r"[\\/]", name)
        if name.strip() == "" or name.startswith(("/", "\\")) or ".." in parts or re.match(r"^[A-Za-z]:", name):
            where.add(f"file name {name!r} points outside the core folder",
                      "put the table inside the core folder and give its name relative to it", f"files.{key}")
            continue
        result[key] = name
    return result


def _check_sections(where: _Collector, entries: list[dict], factor: float, unit: str) -> tuple[Section, ...]:
    sections = []
    seen: set[str] = set()
    for number, entry in enumerate(entries, start=1):
        path = f"sections[{number}]"
        _unknown_keys(where, entry, ("name", "top"), path)
        name = _text(where, entry, "name", f"{path}.name", required=True)
        top = _number(where, entry, "top", f"{path}.top", required=True, lo=0, unit=unit)
        if name is not None and name in seen:
            where.add(f"section name {name!r} is used twice", "give every section its own name", f"{path}.name")
            continue
        if name is not None:
            seen.add(name)
        if name is not None and top is not None:
            sections.append(Section(name=name, top_cm=top * factor))
    return tuple(sections)


def _check_event_layers(where: _Collector, entries: list[dict], factor: float, unit: str) -> list[EventLayer]:
    layers: list[tuple[int, EventLayer]] = []
    for number, entry in enumerate(entries, start=1):
        path = f"event_layers[{number}]"
        _unknown_keys(where, entry, ("top", "bottom", "kind"), path)
        top = _number(where, entry, "top", f"{path}.top", required=True, lo=0, unit=unit)
        bottom = _number(where, entry, "bottom", f"{path}.bottom", required=True, lo=0, unit=unit)
        kind = _text(where, entry, "kind", f"{path}.kind", required=False) or "unspecified"
        if top is None or bottom is None:
            continue
        if bottom <= top:
            where.add(
                f"event layer bottom ({bottom} {unit}) is not below its top ({top} {unit})",
                "swap top and bottom (depth increases downwards) or remove a zero-thickness layer",
                f"{path}.bottom",
            )
            continue
        layers.append((number, EventLayer(top_cm=top * factor, bottom_cm=bottom * factor, kind=kind)))
    ordered = sorted(layers, key=lambda item: item[1].top_cm)
    for (n_upper, upper), (n_lower, lower) in zip(ordered, ordered[1:]):
        if lower.top_cm < upper.bottom_cm:
            where.add(
                f"event layers {n_upper} ({upper.top_cm / factor:g}-{upper.bottom_cm / factor:g} {unit}) and "
                f"{n_lower} ({lower.top_cm / factor:g}-{lower.bottom_cm / factor:g} {unit}) overlap",
                "merge them into one layer or correct their depths",
                f"event_layers[{n_lower}].top",
            )
    return [layer for _, layer in layers]


def _check_hiatuses(
    where: _Collector, entries: list[dict], factor: float, unit: str, layers: list[EventLayer]
) -> list[float]:
    depths = []
    for number, entry in enumerate(entries, start=1):
        path = f"hiatuses[{number}]"
        _unknown_keys(where, entry, ("depth",), path)
        depth = _number(where, entry, "depth", f"{path}.depth", required=True, lo=0, unit=unit)
        if depth is None:
            continue
        depth_cm = depth * factor
        if depth_cm in depths:
            where.add(f"hiatus at {depth:g} {unit} is listed twice", "list each hiatus once", f"{path}.depth")
            continue
        inside = [layer for layer in layers if layer.top_cm < depth_cm < layer.bottom_cm]
        if inside:
            layer = inside[0]
            where.add(
                f"hiatus at {depth:g} {unit} lies inside the event layer "
                f"{layer.top_cm / factor:g}-{layer.bottom_cm / factor:g} {unit}",
                "put the hiatus at the layer top or bottom, or correct the depths",
                f"{path}.depth",
            )
            continue
        depths.append(depth_cm)
    return depths


# ---------------------------------------------------------------------------------------------
# cells
# ---------------------------------------------------------------------------------------------
class _BadCell(ValueError):
    pass


def _cell_to_float(cell: Any) -> float:
    """A cell as float; NaN for missing. Raises _BadCell with a reason."""
    if cell is None:
        return math.nan
    if isinstance(cell, (bool, np.bool_)):
        raise _BadCell(f"{cell!r} is a true/false value, not a number")
    if isinstance(cell, (int, float, np.integer, np.floating)):
        value = float(cell)
        if math.isinf(value):
            raise _BadCell("infinite value")
        return value
    if isinstance(cell, str):
        text = cell.strip()
        if text == "" or text.lower() in MISSING_MARKERS:
            return math.nan
        try:
            value = float(text)
        except ValueError:
            if re.fullmatch(r"[-+]?\d*,\d+", text):
                raise _BadCell(f"{cell!r} uses a decimal comma") from None
            raise _BadCell(f"{cell!r} is not a number") from None
        if not math.isfinite(value):
            raise _BadCell(f"{cell!r} is not a finite number")
        return value
    if pd.isna(cell):
        return math.nan
    raise _BadCell(f"{cell!r} ({type(cell).__name__}) is not a number")


def parse_bool(cell: Any) -> bool | None:
    """Read a true/false cell: true/false, yes/no, 1/0 (any case); empty -> False.

    Returns ``None`` when the cell is not one of those.
    """
    if cell is None or (isinstance(cell, float) and math.isnan(cell)):
        return False
    if isinstance(cell, (bool, np.bool_)):
        return bool(cell)
    if isinstance(cell, (int, float, np.integer, np.floating)):
        return {1.0: True, 0.0: False}.get(float(cell))
    if isinstance(cell, str):
        text = cell.strip().lower()
        if text == "":
            return False
        if text in TRUE_WORDS:
            return True
        if text in FALSE_WORDS:
            return False
    return None


def _cell_to_text(cell: Any) -> str | None:
    if cell is None or (isinstance(cell, float) and math.isnan(cell)):
        return None
    if isinstance(cell, float) and cell.is_integer():
        return str(int(cell))
    text = str(cell).strip()
    return text or None


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
                value = _cell_to_float(cell)
            except _BadCell as reason:
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
        return [_cell_to_text(cell) for cell in self.table[column]]

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
        return composite, depth_cm, names

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
    checker = _TableChecker(table, file, spec.depth_factor, spec.depth_unit)
    if not checker.require([f"depth_{spec.depth_unit}"]):
        return None, checker.problems
    depth_cm, section_depth, _ = checker.depths(spec.sections, "sample")
    checker.unique_depths(depth_cm, f"depth_{spec.depth_unit}")
    columns, proxies = _numeric_columns_with_layout(
        checker, spec, depth_cm, section_depth, value_name="proxy value", errors_allowed=True
    )
    if checker.problems:
        return None, checker.problems
    return _table_frame(columns, checker.rows), []


def check_counts(table: pd.DataFrame, file: str, spec: CoreSpec) -> tuple[pd.DataFrame | None, list[Problem]]:
    """Validate and convert the counts table: depth as for samples, taxa counts >= 0."""
    checker = _TableChecker(table, file, spec.depth_factor, spec.depth_unit)
    if not checker.require([f"depth_{spec.depth_unit}"]):
        return None, checker.problems
    depth_cm, section_depth, _ = checker.depths(spec.sections, "count")
    checker.unique_depths(depth_cm, f"depth_{spec.depth_unit}")
    columns, taxa = _numeric_columns_with_layout(
        checker, spec, depth_cm, section_depth, value_name="count", errors_allowed=False
    )
    if not taxa:
        checker.add("the counts table has no taxon column", "add one column of counts per taxon", row=1)
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
    ``thickness_<unit>`` >= 0; ``reservoir_error`` >= 0; ``exclude`` a true/false word.
    Dates deeper than the deepest sample are fine. Extra columns are kept as read.
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
            checker.add(f"unknown date kind {kind!r}", "use radiocarbon or calendar", row, "kind")
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
            out["thickness_cm"] = checker.numbers(column, lo=0.0, what="thickness") * spec.depth_factor
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
        elif kind == "calendar" and age < youngest:
            checker.add(
                f"calendar age {age:g} cal BP is younger than the core top "
                f"({spec.top_age_cal_bp:g} cal BP = {spec.collected_ce} CE)",
                "give calendar ages in cal BP (years before 1950 CE; 1950 - year CE)", row, "age",
            )


def check_curve_names(dates: pd.DataFrame, file: str, known: set[str] | dict) -> list[Problem]:
    """Problems for dates whose ``curve`` is not a name from the run config's [curves].

    Parameters
    ----------
    dates : DataFrame
        A converted dates table (with ``curve`` and ``source_row``).
    file : str
        How problems name the dates file.
    known : set of str
        Curve names defined in the run config.
    """
    problems = []
    names = sorted(known)
    radiocarbon_without_curve = []
    for row, kind, curve in zip(dates["source_row"], dates["kind"], dates["curve"]):
        curve = None if curve is None or pd.isna(curve) else str(curve)
        if curve is not None and curve not in known:
            problems.append(Problem(
                file, f"unknown curve {curve!r}",
                ("use a curve named in the run config [curves]: " + ", ".join(names)) if names
                else "add the curve to the run config [curves]",
                row=int(row), column="curve",
            ))
        elif curve is None and kind == "radiocarbon" and not names:
            radiocarbon_without_curve.append(int(row))
    for row in radiocarbon_without_curve:
        problems.append(Problem(file, "radiocarbon date but the run config has no [curves]",
                                "add a calibration curve to [curves]", row=row, column="curve"))
    return problems
