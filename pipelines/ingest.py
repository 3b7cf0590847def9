"""Core folder -> :class:`proxies.cores.Core`, collecting every problem in one pass.

:func:`inspect_core` reads ``core.toml`` and the tables it names, runs every check of
:mod:`proxies.cores.validation` and returns the core (or ``None``) with all problems found;
:func:`load_core` raises :class:`~proxies.problems.InputError` instead. Files are only opened
for reading: ingest never writes to, renames or touches an input.

Problems name files by the path as given (``<folder>/samples.csv``), so a user can open them.
Every file named in ``core.toml`` must really lie inside the core folder: a symbolic link
leading outside it is refused, and a folder where a file belongs is named as a folder.
"""

from __future__ import annotations

import os
import re
import tomllib
from pathlib import Path

from proxies.cores.model import Core
from proxies.cores.validation import (
    CoreSpec,
    check_core_mapping,
    check_counts,
    check_curve_names,
    check_measurements,
    check_dates,
    check_samples,
)
from proxies.cores.lead210 import check_lead210
from proxies.problems import InputError, Problem

from pipelines.tables import read_table
from pipelines.textfiles import read_text

__all__ = ["inspect_core", "load_core", "read_toml", "CORE_FILE"]

CORE_FILE = "core.toml"
_TOML_POSITION = re.compile(r"\(at line (\d+), column (\d+)\)")


def _display(folder: Path, name: str) -> str:
    return os.path.join(str(folder), name)


def read_toml(path: Path, display_name: str) -> tuple[dict | None, list[Problem]]:
    """Parse a TOML file (UTF-8, a byte-order mark accepted); a syntax error becomes a problem
    with its line number, a wrong encoding one naming the encoding."""
    try:
        text = read_text(path, display_name)
    except InputError as error:
        return None, error.problems
    try:
        return tomllib.loads(text), []
    except tomllib.TOMLDecodeError as error:
        text = str(error)
        match = _TOML_POSITION.search(text)
        row = int(match.group(1)) if match else None
        message = _TOML_POSITION.sub("", text).strip()
        if match:
            message += f" (column {match.group(2)})"
        return None, [Problem(display_name, f"invalid TOML: {message}",
                              "fix the syntax on that line (strings need quotes, one key = value per line)",
                              row=row)]


def _inside(folder: Path, path: Path, display: str, named_in: str) -> list[Problem]:
    """A file named in core.toml must be a file whose real location is inside the core folder."""
    if path.exists() or path.is_symlink():
        real, root = path.resolve(), folder.resolve()
        if root not in real.parents:
            return [Problem(display, f"is a link to {real}, outside the core folder ({named_in})",
                            "copy the file into the core folder instead of linking to it")]
    if path.is_dir():
        return [Problem(display, f"is a folder, not a table file ({named_in})",
                        "name the table file itself in core.toml [files]")]
    if not path.is_file():
        return [Problem(display, f"file not found ({named_in})",
                        f"add the file or correct {named_in.split()[-1]} in {CORE_FILE}")]
    return []


def inspect_core(
    folder: str | Path, *, year: int | None = None, curve_names: set[str] | None = None,
    default_curve: str | None = None, notes: list[str] | None = None,
) -> tuple[Core | None, list[Problem]]:
    """Read and validate one core folder, collecting every problem.

    Parameters
    ----------
    folder : str or Path
        The core folder (holding ``core.toml``).
    year : int, optional
        The current year [CE] for the "collected in the future" check (default: today).
    curve_names : set of str, optional
        Curve names of the run config's ``[curves]``; when given, every date's ``curve``
        must be one of them and every radiocarbon date must get a curve by the run's rule
        (:func:`proxies.cores.validation.resolve_curve_name`).
    default_curve : str, optional
        ``[chronology] default_curve`` of the run config.
    notes : list of str, optional
        When given, what reading skipped (comment lines, title rows, the sheet read) is
        appended to it.

    Returns
    -------
    core : Core or None
        ``None`` when any problem was found.
    problems : list of Problem
        In the order found: core.toml first, then samples, dates, counts.
    """
    folder_path = Path(folder)
    if not folder_path.is_dir():
        return None, [Problem(str(folder), "not a folder", "give the path of a core folder holding core.toml")]
    toml_name = _display(folder, CORE_FILE)
    problems = _inside(folder_path, folder_path / CORE_FILE, toml_name, "the core's description")
    if problems:
        return None, problems
    mapping, problems = read_toml(folder_path / CORE_FILE, toml_name)
    if mapping is None:
        return None, problems
    spec, problems = check_core_mapping(mapping, toml_name, year=year)
    if spec is None:
        return None, problems
    tables = {}
    for role, checker in (("samples", check_samples), ("dates", check_dates), ("counts", check_counts),
                          ("lead210", check_lead210)):
        if role not in spec.files:
            continue
        display = _display(folder, spec.files[role])
        path = folder_path / spec.files[role]
        found = _inside(folder_path, path, display, f"named in {CORE_FILE} [files] {role}")
        if found:
            problems.extend(found)
            continue
        try:
            raw = read_table(path, display, sheet=spec.sheets.get(role))
        except InputError as error:
            problems.extend(error.problems)
            continue
        if notes is not None:
            notes.extend(raw.attrs.get("notes", []))
        table, found = checker(raw, display, spec)
        problems.extend(found)
        if role == "dates" and table is not None and curve_names is not None:
            problems.extend(check_curve_names(table, display, curve_names, default_curve))
        tables[role] = table
    if tables.get("samples") is not None and (tables.get("counts") is not None or "counts" not in spec.files):
        problems.extend(check_measurements(tables["samples"], tables.get("counts"),
                                           _display(folder, spec.files["samples"])))
    if problems:
        return None, problems
    return _build_core(spec, tables, str(folder)), []


def _build_core(spec: CoreSpec, tables: dict, folder: str) -> Core:
    files = {role: _display(folder, name) for role, name in spec.files.items()}
    return Core(
        id=spec.id,
        archive=spec.archive,
        latitude=spec.latitude,
        longitude=spec.longitude,
        collected_ce=spec.collected_ce,
        site=spec.site,
        top_age_error=spec.top_age_error,
        samples=tables["samples"],
        dates=tables["dates"],
        counts=tables.get("counts"),
        sections=spec.sections,
        event_layers=spec.event_layers,
        hiatuses_cm=spec.hiatuses_cm,
        folder=folder,
        files=files,
        top_intact=spec.top_intact,
        lead210=tables.get("lead210"),
    )


def load_core(folder: str | Path, *, year: int | None = None) -> Core:
    """Read one core folder; raise :class:`InputError` carrying every problem found."""
    core, problems = inspect_core(folder, year=year)
    if problems:
        raise InputError(problems)
    return core
