"""Reading a dated series: a table of age and value from a published record or another lab.

Text tables come in many layouts; this reader accepts, without editing the file:

- any line ends (LF, CRLF, lone CR) and a UTF-8 byte-order mark;
- comma, tab or blank-space separated columns (sniffed from the header line);
- several sections in one file, each starting with its own header line (a line whose
  first field is not a number); ``section`` picks one (1-based, default 1);
- blank lines and rows without a value (blank trailing rows) are skipped.

Ages may be in ``yr`` or ``kyr`` before present (``age_units``). The file is never modified.
Bad input raises :class:`proxies.problems.InputError` naming file, row, column and a fix.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from proxies.problems import InputError, Problem

__all__ = ["DatedTable", "read_dated_table", "AGE_UNITS"]

#: Multipliers from the file's age units to years.
AGE_UNITS = {"yr": 1.0, "kyr": 1000.0}


@dataclass(frozen=True)
class DatedTable:
    """One dated series as read: ages [yr BP, increasing] and values, with where they came from."""

    file: str
    age_column: str
    value_column: str
    age_yr: np.ndarray
    value: np.ndarray
    rows: np.ndarray  # 1-based line numbers of the kept rows


def _lines(path: Path) -> list[str]:
    text = path.read_bytes().decode("utf-8-sig", errors="strict")
    return re.split(r"\r\n|\r|\n", text)


def _splitter(header: str):
    """(header splitter, row splitter): tabs or commas when the header has them; else blank
    space, header names separated by two or more blanks (names may hold single blanks)."""
    if "\t" in header:
        cut = lambda line: [f.strip() for f in line.split("\t")]  # noqa: E731
        return cut, cut
    if "," in header:
        cut = lambda line: [f.strip() for f in line.split(",")]  # noqa: E731
        return cut, cut
    return (lambda line: re.split(r"\s{2,}", line.strip())), (lambda line: line.split())


def _number(field: str) -> float | None:
    try:
        value = float(field)
    except ValueError:
        return None
    return value if math.isfinite(value) else None


def _sections(lines: list[str]) -> list[tuple[int, list[int]]]:
    """(header line index, data line indices) per section: a section is a header line (first
    field not a number) directly followed (blank lines aside) by rows whose first field is a
    number; notes between sections are ignored. A line right after a data row (no blank line
    between) is a data row whatever it holds, so that a bad age is reported, not taken for a
    new header."""
    sections: list[tuple[int, list[int]]] = []
    header = None
    in_rows = False  # the previous line was a data row (no blank line since)
    for i, line in enumerate(lines):
        if not line.strip():
            in_rows = False
            continue
        first = re.split(r"[\t,]|\s+", line.strip())[0]
        is_row = _number(first) is not None and len(re.split(r"[\t,]|\s+", line.strip())) > 1
        if not is_row and not (in_rows and sections):
            header = i
            continue
        in_rows = True
        if header is not None:
            sections.append((header, []))
            header = None
        if sections:
            sections[-1][1].append(i)
    return sections


def _column_index(names: list[str], wanted: str | int, file: str, key: str, header_row: int) -> int:
    if isinstance(wanted, int) and not isinstance(wanted, bool):
        if 1 <= wanted <= len(names):
            return wanted - 1
    else:
        lowered = [n.strip().lower() for n in names]
        if str(wanted).strip().lower() in lowered:
            return lowered.index(str(wanted).strip().lower())
    raise InputError(Problem(file, f"column {wanted!r} not found; the header has {names}", row=header_row,
                             column=key, fix=f"set {key} to one of the header's names or to a 1-based "
                             "column number"))


def read_dated_table(path: str | Path, age_column: str | int, value_column: str | int,
                     age_units: str = "yr", section: int = 1) -> DatedTable:
    """Read one section of a text table of age and value.

    Parameters
    ----------
    path : path of the file
    age_column, value_column : str or int
        Header names (case-insensitive) or 1-based column numbers.
    age_units : {"yr", "kyr"}
        Units of the age column (before present).
    section : int
        Which section (1-based) of a file with several header lines.

    Returns
    -------
    DatedTable
        Rows sorted by age; rows with an empty or non-numeric value are skipped (a non-numeric
        age is an error).

    Raises
    ------
    proxies.problems.InputError
    """
    path = Path(path)
    file = str(path)
    if age_units not in AGE_UNITS:
        raise InputError(Problem(file, f"unknown age_units {age_units!r}", column="age_units",
                                 fix=f"use one of {sorted(AGE_UNITS)}"))
    try:
        lines = _lines(path)
    except FileNotFoundError:
        raise InputError(Problem(file, "file not found", fix="check the path in the run config")) from None
    except UnicodeDecodeError as error:
        raise InputError(Problem(file, f"not UTF-8 text ({error.reason} at byte {error.start})",
                                 fix="save the table as UTF-8 text")) from None
    sections = _sections(lines)
    if not 1 <= section <= len(sections):
        raise InputError(Problem(file, f"section {section} asked for, the file has {len(sections)}",
                                 column="section", fix="give a section between 1 and the number of header lines"))
    header_index, data = sections[section - 1]
    split_header, split = _splitter(lines[header_index])
    names = split_header(lines[header_index])
    ia = _column_index(names, age_column, file, "age_column", header_index + 1)
    iv = _column_index(names, value_column, file, "value_column", header_index + 1)
    ages, values, rows = [], [], []
    for i in data:
        fields = split(lines[i])
        age = _number(fields[ia]) if ia < len(fields) else None
        value = _number(fields[iv]) if iv < len(fields) and fields[iv] != "" else None
        if value is None:
            continue
        if age is None:
            raise InputError(Problem(file, f"age {fields[ia] if ia < len(fields) else ''!r} is not a number",
                                     row=i + 1, column=names[ia], fix="give every row with a value an age"))
        ages.append(age * AGE_UNITS[age_units])
        values.append(value)
        rows.append(i + 1)
    if len(ages) < 3:
        raise InputError(Problem(file, f"only {len(ages)} rows with age and value in section {section}",
                                 column=names[iv], fix="check the columns and the section"))
    order = np.argsort(ages, kind="mergesort")
    return DatedTable(file, names[ia], names[iv], np.asarray(ages)[order], np.asarray(values)[order],
                      np.asarray(rows)[order])
