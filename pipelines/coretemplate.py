"""A new core folder from a commented template: ``core.toml`` with every key explained and
empty tables (``samples.csv``, ``dates.csv``) with the right headers.

The template is meant to be filled by hand (or by a script) and then checked with
``downcore check``. Values the user did not give on the command line stay as commented
``REQUIRED`` lines, so an unfilled folder fails the check with one precise problem per
missing key, and the empty tables fail with "no data rows" until rows are added. The keys
written here are exactly those core.toml accepts, each under its table and in the declared
order (``CORE_KEYS``, ``FILE_KEYS`` and ``BLOCK_KEYS`` of :mod:`proxies.cores.core_file`;
``tests/test_new_core.py`` fails when a declared key is missing here or one is added here only).
"""

from __future__ import annotations

import os
import pathlib
from typing import Iterable

from proxies.cores.validation import ARCHIVES, DEPTH_UNITS, ID_PATTERN

from pipelines.runfolder import atomic_write_text

__all__ = ["core_template", "write_core_template", "DATE_COLUMNS"]

#: the dates table's columns: required first, then the optional ones (empty cells are fine)
DATE_COLUMNS = ("label", "depth", "kind", "age", "error", "thickness", "curve", "reservoir_offset",
                "reservoir_error", "exclude")


def _line(code: str, comment: str) -> str:
    """``code`` and its comment, comments aligned in one column."""
    return f"{code:<27}# {comment}"


def _required(key: str, value: object | None, example: str, text: str) -> str:
    """A ``key = value`` line, or a commented REQUIRED line when the value is not known yet."""
    if value is None:
        return _line(f"# {key} = {example}", f"REQUIRED: {text}")
    return _line(f"{key} = {value}", text)


def _core_toml(core_id: str, archive: str, depth_unit: str, latitude: float | None,
               longitude: float | None, collected: int | None, site: str) -> str:
    unit = depth_unit
    lines = [
        f"# core.toml of core {core_id}. Lines starting with '#' are comments. On each REQUIRED",
        "# line remove the leading '# ' and give the value; add rows to the tables; then run",
        "#     downcore check <this folder>",
        "",
        "[core]",
        _line(f'id = "{core_id}"', "letters, digits, '-', '_' (1-64); names the core's folder in a run"),
        _line(f'archive = "{archive}"', " | ".join(ARCHIVES)),
        _required("latitude", latitude, "61.2", "decimal degrees north, -90..90"),
        _required("longitude", longitude, "14.9", "decimal degrees east, -180..180"),
        _required("collected", collected, "2018", "year CE the core was taken (core top = 1950 - collected cal BP)"),
        _line(f'depth_unit = "{unit}"', "unit of every depth/thickness column: " + " | ".join(DEPTH_UNITS)),
        _line(f'site = "{site}"', "optional free text: where the core comes from"),
        _line("# top_age_error = 5", "optional: 1-sigma uncertainty of the core-top age [yr]"),
        _line("# top_intact = false", "optional: false when the top is lost (older than the collection year)"),
        "",
        _line("[files]", "file names relative to this folder; files must stay inside it"),
        _line('samples = "samples.csv"', "required: proxy measurements (.csv, .tsv, .xlsx or .parquet)"),
        _line('dates = "dates.csv"', "required: radiocarbon and calendar dates"),
        _line('# counts = "counts.csv"', f"optional: assemblage counts, depth_{unit} + one column per taxon"),
        _line('# lead210 = "lead210.csv"', f"optional: 210Pb activities by depth_{unit} (CRS/CIC dating of the top)"),
        "",
        _line("# [[sections]]", "optional, one block per core section; every table then needs"),
        _line('# name = "A"', "a 'section' column, and its depths are measured below the"),
        _line("# top = 0.0", f"section's top, given here as composite depth [{unit}]"),
        "",
        _line("# [[event_layers]]", f"optional, one block per instantaneous deposit [{unit}, composite];"),
        _line("# top = 120.0", "cut out to give the event-free depth of the age model;"),
        _line("# bottom = 124.5", "top above bottom; layers may touch but not overlap"),
        _line('# kind = "turbidite"', "free text: turbidite, tephra, slump, ..."),
        "",
        _line("# [[hiatuses]]", "optional, one block per gap in deposition"),
        _line("# depth = 300.0", f"composite depth [{unit}], not strictly inside an event layer"),
        "",
    ]
    return "\n".join(lines)


def core_template(core_id: str, *, archive: str = "lake", depth_unit: str = "cm",
                  latitude: float | None = None, longitude: float | None = None,
                  collected: int | None = None, site: str = "",
                  proxies: Iterable[str] = ()) -> dict[str, str]:
    """The files of a new core folder, ``{file name: text}``.

    Parameters
    ----------
    core_id : str
        The core's id (checked against the id rule).
    archive, depth_unit : str
        One of :data:`proxies.cores.validation.ARCHIVES` / ``DEPTH_UNITS``.
    latitude, longitude : float or None
        [decimal degrees]; ``None`` leaves a commented REQUIRED line.
    collected : int or None
        Year CE the core was taken; ``None`` leaves a commented REQUIRED line.
    site : str
        Free text.
    proxies : iterable of str
        Proxy column names for the samples table (each also gets an ``<proxy>_error`` column).

    Raises
    ------
    ValueError
        For an unsafe id, an unknown archive or depth unit, or a proxy name that is not a
        plain column name.
    """
    if not ID_PATTERN.fullmatch(core_id) or core_id != core_id.strip():
        raise ValueError(f"core id {core_id!r} is not safe as a folder name: use 1-64 letters, digits, "
                         "'-' or '_', starting with a letter or digit (e.g. TARN-2)")
    if archive not in ARCHIVES:
        raise ValueError(f"unknown archive {archive!r}: use one of {', '.join(ARCHIVES)}")
    if depth_unit not in DEPTH_UNITS:
        raise ValueError(f"unknown depth unit {depth_unit!r}: use one of {', '.join(DEPTH_UNITS)}")
    if any(c in site for c in '"\\\n'):
        raise ValueError("the site text may not hold quotes, backslashes or line breaks")
    proxies = list(proxies)
    for name in proxies:
        if not name.isidentifier() or name.startswith(("depth_", "thickness_")):
            raise ValueError(f"proxy column {name!r}: use letters, digits and '_' (e.g. uk37, d18o_permil)")
    sample_columns = [f"depth_{depth_unit}", f"thickness_{depth_unit}"]
    sample_columns += [column for name in proxies for column in (name, f"{name}_error")]
    date_columns = [f"{c}_{depth_unit}" if c in ("depth", "thickness") else c for c in DATE_COLUMNS]
    return {
        "core.toml": _core_toml(core_id, archive, depth_unit, latitude, longitude, collected, site),
        "samples.csv": ",".join(sample_columns) + "\n",
        "dates.csv": ",".join(date_columns) + "\n",
    }


def write_core_template(folder: str | os.PathLike[str], core_id: str, **options) -> list[pathlib.Path]:
    """Write :func:`core_template` into ``folder`` (created; refused when it exists and is not
    empty, so nothing is ever overwritten). Returns the files written.

    Raises
    ------
    FileExistsError
        When ``folder`` exists and is not an empty folder.
    ValueError
        As :func:`core_template`.
    """
    target = pathlib.Path(folder).expanduser()
    if target.exists() and (not target.is_dir() or any(target.iterdir())):
        raise FileExistsError(f"{target} exists and is not an empty folder -- give a new folder "
                              "for the core; nothing was written")
    files = core_template(core_id, **options)
    return [atomic_write_text(target / name, text) for name, text in files.items()]
