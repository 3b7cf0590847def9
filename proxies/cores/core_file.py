"""Validation of a parsed ``core.toml``: the core's metadata, files, sections, event layers
and hiatuses (pure; no file I/O; every problem collected in one pass).

Rules beyond types and ranges:

- the core id is safe as a folder name on every platform: 1-64 letters, digits, ``-`` or
  ``_`` starting with a letter or digit (matched whole, so a final newline is refused), not a
  name reserved by Windows (``CON``, ``NUL``, ``COM1``...) and not one of a run folder's own
  entries (:data:`RUN_FOLDER_ENTRIES`);
- ``[files]`` entries are names inside the core folder, either ``"samples.csv"`` or
  ``{ file = "book.xlsx", sheet = "Data" }`` to read a named Excel sheet;
- sections have distinct names and distinct tops; event layers do not overlap.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from datetime import date
from typing import Any

from proxies.cores.depth import EventLayer, Section
from proxies.cores.model import BP_ZERO_CE, CoreIdentity
from proxies.problems import Problem
from proxies.settings_spec import did_you_mean

__all__ = ["ARCHIVES", "DEPTH_UNITS", "CoreSpec", "current_year", "check_core_mapping", "RUN_FOLDER_ENTRIES"]

ARCHIVES = ("lake", "marine", "peat", "speleothem", "other")
#: depth unit -> factor to cm
DEPTH_UNITS = {"cm": 1.0, "mm": 0.1, "m": 100.0}
#: earliest accepted collection year [yr CE]
EARLIEST_COLLECTION_CE = 1850
ID_PATTERN = re.compile(r"[A-Za-z0-9][A-Za-z0-9_-]{0,63}")
#: device names Windows reserves in every folder, with or without a suffix (case-insensitive)
WINDOWS_RESERVED = frozenset({"con", "prn", "aux", "nul"} | {f"com{i}" for i in range(10)}
                             | {f"lpt{i}" for i in range(10)})
#: entries a run folder holds besides the core folders (compared case-insensitively)
RUN_FOLDER_ENTRIES = frozenset({"figures", "training", "exports", "report", "logs", "cache", "stack",
                                "summary", "timings", "manifest", "replay"})
TOP_LEVEL_KEYS = ("core", "files", "sections", "event_layers", "hiatuses")
CORE_KEYS = ("id", "archive", "latitude", "longitude", "collected", "depth_unit", "site", "top_age_error",
             "top_intact")
FILE_KEYS = ("samples", "dates", "counts", "lead210")
#: the keys of each ``[[block]]`` table (sections, event layers, hiatuses)
BLOCK_KEYS = {"sections": ("name", "top"), "event_layers": ("top", "bottom", "kind"), "hiatuses": ("depth",)}


def current_year() -> int:
    """This year [CE], from the system clock (injectable everywhere as ``current_year=``)."""
    return date.today().year


@dataclass(frozen=True)
class CoreSpec(CoreIdentity):
    """The contents of a valid ``core.toml``, depths already in cm.

    Attributes beyond the identity (:class:`proxies.cores.model.CoreIdentity`) mirror
    :class:`proxies.cores.model.Core`; ``depth_unit`` is the unit the tables are written in,
    ``files`` maps ``samples``/``dates``/``counts`` to file names.
    """

    depth_unit: str
    files: dict[str, str]
    sections: tuple[Section, ...] = ()
    event_layers: tuple[EventLayer, ...] = ()
    hiatuses_cm: tuple[float, ...] = ()
    sheets: dict[str, str] = field(default_factory=dict)
    top_intact: bool | None = None

    @property
    def depth_factor(self) -> float:
        """Multiply a table depth by this to get cm."""
        return DEPTH_UNITS[self.depth_unit]

    @property
    def top_age_cal_bp(self) -> float:
        return float(BP_ZERO_CE) - self.collected_ce


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


def _choice_fix(value: str, allowed) -> str:
    hint = did_you_mean(value, allowed)
    return (hint + " " if hint else "") + "use one of: " + ", ".join(allowed)


def _unknown_keys(where: _Collector, table: dict, allowed: tuple[str, ...], path: str) -> None:
    for key in table:
        if key not in allowed:
            hint = did_you_mean(key, allowed)
            where.add(
                f"unknown key '{key}'" + (f" ({hint})" if hint else ""),
                "remove it or correct the spelling; allowed: " + ", ".join(allowed),
                f"{path}.{key}" if path else key,
            )


def _safe_id(where: _Collector, core_id: str) -> str | None:
    """The id when it is safe as a folder name everywhere (see the module notes), else None."""
    if not ID_PATTERN.fullmatch(core_id):
        where.add(f"core id {core_id!r} is not safe as a folder name",
                  "use 1-64 letters, digits, '-' or '_', starting with a letter or digit (e.g. TARN-2)",
                  "core.id")
        return None
    if core_id.lower() in WINDOWS_RESERVED:
        where.add(f"core id {core_id!r} is a device name Windows reserves (no folder can have it)",
                  "add a letter or number, e.g. " + core_id + "-1", "core.id")
        return None
    if core_id.lower() in RUN_FOLDER_ENTRIES:
        where.add(f"core id {core_id!r} is the name of a run folder's own entry "
                  f"({', '.join(sorted(RUN_FOLDER_ENTRIES))})", "give the core an id of its own, e.g. "
                  + core_id.upper() + "-1", "core.id")
        return None
    return core_id


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
    if core_id is not None:
        core_id = _safe_id(where, core_id)
    archive = _text(where, core, "archive", "core.archive", required=True)
    if archive is not None and archive not in ARCHIVES:
        where.add(f"unknown archive {archive!r}", _choice_fix(archive, ARCHIVES), "core.archive")
        archive = None
    latitude = _number(where, core, "latitude", "core.latitude", required=True, lo=-90, hi=90, unit="decimal degrees")
    longitude = _number(
        where, core, "longitude", "core.longitude", required=True, lo=-180, hi=180, unit="decimal degrees"
    )
    collected = _collected_year(where, core, year)
    depth_unit = core.get("depth_unit", "cm")
    if not isinstance(depth_unit, str) or depth_unit not in DEPTH_UNITS:
        where.add(
            f"unknown depth_unit {depth_unit!r}", _choice_fix(str(depth_unit), tuple(DEPTH_UNITS)), "core.depth_unit"
        )
        depth_unit = None
    site = _text(where, core, "site", "core.site", required=False) or ""
    top_age_error = _number(where, core, "top_age_error", "core.top_age_error", required=False, lo=0, unit="yr")
    if top_age_error == 0:
        where.add("'top_age_error' = 0: an age known without any error cannot be weighed against the dates",
                  "give the 1-sigma error of the core-top age in years (e.g. 5), or leave the key out",
                  "core.top_age_error")
        top_age_error = None
    top_intact = _top_intact(where, core)

    files, sheets = _check_files(where, _table(where, mapping, "files", required=True))
    factor = DEPTH_UNITS.get(depth_unit or "cm", 1.0)
    unit = depth_unit or "cm"
    sections = _check_sections(where, _array_of_tables(where, mapping, "sections"), factor, unit)
    layers = _check_event_layers(where, _array_of_tables(where, mapping, "event_layers"), factor, unit)
    hiatuses = _check_hiatuses(where, _array_of_tables(where, mapping, "hiatuses"), factor, unit, layers)

    if where.problems:
        return None, where.problems
    spec = CoreSpec(
        id=core_id, archive=archive, latitude=latitude, longitude=longitude, collected_ce=collected,
        site=site, top_age_error=top_age_error, depth_unit=depth_unit, files=files, sheets=sheets,
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


def _file_entry(where: _Collector, files: dict, key: str) -> tuple[str | None, str | None]:
    """(file name, sheet or None) of one [files] entry: "name" or { file = ..., sheet = ... }."""
    value = files.get(key)
    if isinstance(value, dict):
        _unknown_keys(where, value, ("file", "sheet"), f"files.{key}")
        name = _text(where, value, "file", f"files.{key}.file", required=True)
        sheet = _text(where, value, "sheet", f"files.{key}.sheet", required=False)
        if sheet is not None and name is not None and not name.lower().endswith(".xlsx"):
            where.add(f"files.{key} names a sheet but {name!r} is not an .xlsx workbook",
                      "remove sheet, or give the workbook", f"files.{key}.sheet")
        return name, sheet
    return _text(where, files, key, f"files.{key}", required=key not in ("counts", "lead210")), None


def _check_files(where: _Collector, files: dict) -> tuple[dict[str, str], dict[str, str]]:
    _unknown_keys(where, files, FILE_KEYS, "files")
    result, sheets = {}, {}
    for key in FILE_KEYS:
        name, sheet = _file_entry(where, files, key)
        if name is None:
            continue
        parts = re.split(r"[\\/]", name)
        if name.strip() == "" or name.startswith(("/", "\\")) or ".." in parts or re.match(r"^[A-Za-z]:", name):
            where.add(f"file name {name!r} points outside the core folder",
                      "put the table inside the core folder and give its name relative to it", f"files.{key}")
            continue
        result[key] = name
        if sheet is not None:
            sheets[key] = sheet
    return result, sheets


def _check_sections(where: _Collector, entries: list[dict], factor: float, unit: str) -> tuple[Section, ...]:
    sections = []
    seen: set[str] = set()
    for number, entry in enumerate(entries, start=1):
        path = f"sections[{number}]"
        _unknown_keys(where, entry, BLOCK_KEYS["sections"], path)
        name = _text(where, entry, "name", f"{path}.name", required=True)
        top = _number(where, entry, "top", f"{path}.top", required=True, lo=0, unit=unit)
        if top is not None and any(abs(s.top_cm - top * factor) < 1e-9 for s in sections):
            where.add(f"section {name!r} starts at {top:g} {unit} like another section",
                      "give every section its own top (composite depth)", f"{path}.top")
            continue
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
        _unknown_keys(where, entry, BLOCK_KEYS["event_layers"], path)
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
        _unknown_keys(where, entry, BLOCK_KEYS["hiatuses"], path)
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


