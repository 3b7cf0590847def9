"""Read calibration-curve files (published five-column layout) into CalibrationCurve objects.

The layout: optional ``#`` comment lines, then one row per calendar age with five numbers
separated by commas, semicolons, tabs or spaces: cal BP, 14C age, sigma, Delta14C, sigma.
Rows may be in any order. Parsing is done by :func:`proxies.chronology.parse_curve_text`;
this module only reads the bytes and names the file in every error.
"""

from __future__ import annotations

import threading
from pathlib import Path

from proxies.chronology.curves import CalibrationCurve, parse_curve_text
from proxies.problems import InputError, Problem

__all__ = ["read_curve_file", "read_curve_file_once"]

_PARSED: dict[tuple, CalibrationCurve] = {}
_PARSED_LOCK = threading.Lock()


def read_curve_file(path: str | Path, name: str | None = None) -> CalibrationCurve:
    """Read one curve file.

    Parameters
    ----------
    path : str or Path
        The file.
    name : str, optional
        Curve name (its ``[curves]`` key); default the file's stem.

    Raises
    ------
    proxies.problems.InputError
        The file is missing, unreadable, not UTF-8 text, or malformed (problems name the file
        and line).
    """
    path = Path(path)
    name = name or path.stem
    try:
        raw = path.read_bytes()
    except OSError as error:
        raise InputError(Problem(str(path), f"cannot read the curve file: {error.strerror or error}",
                                 "check the path in [curves]")) from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        try:
            text = raw.decode("latin-1")
        except UnicodeDecodeError:  # pragma: no cover - latin-1 decodes every byte
            raise InputError(Problem(str(path), "the curve file is not text", "give a text file")) from None
    if "\x00" in text:
        raise InputError(Problem(str(path), "the curve file is binary, not text",
                                 "give the curve as a text file with five columns"))
    return parse_curve_text(text, name=name, source=str(path))


def read_curve_file_once(path: str | Path, name: str | None = None) -> CalibrationCurve:
    """:func:`read_curve_file`, remembered for the life of the process.

    ``downcore check`` inside a run, and every core of the run, share one parse of each curve
    file. The key is the file's resolved path, the curve name, its size and modification time,
    so a file edited between two runs of one process is read again. A file that cannot be
    read raises as :func:`read_curve_file` does.
    """
    path = Path(path)
    try:
        stat = path.stat()
    except OSError:
        return read_curve_file(path, name)
    key = (str(path.resolve()), name or path.stem, stat.st_size, stat.st_mtime_ns)
    with _PARSED_LOCK:
        curve = _PARSED.get(key)
    if curve is None:
        curve = read_curve_file(path, name)
        with _PARSED_LOCK:
            _PARSED[key] = curve
    return curve
