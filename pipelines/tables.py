"""Read a table file into a DataFrame: one small reader per format behind :func:`read_table`.

Supported: ``.csv`` (comma), ``.tsv`` (tab), ``.xlsx`` (first sheet) and ``.parquet``. Every
cell is kept as read -- text stays text (empty cells become ``None``), spreadsheet and parquet
cells keep their stored type -- so that validation can say exactly which cell is wrong. The
index of the returned frame, named ``source_row``, holds the 1-based row a user sees in the
file (header = row 1); blank rows are skipped but keep the numbering. For parquet, which has
no visible rows, record ``i`` (0-based) is called row ``i + 2``.

Unreadable, empty or not-a-table files and unknown suffixes raise
:class:`proxies.problems.InputError` naming the file.
"""

from __future__ import annotations

import csv
import zipfile
from collections.abc import Callable, Iterable
from pathlib import Path

import pandas as pd

from proxies.problems import InputError, Problem

__all__ = ["read_table", "TABLE_SUFFIXES"]

ROW_INDEX_NAME = "source_row"


def read_table(path: str | Path, display_name: str | None = None) -> pd.DataFrame:
    """Read one table file.

    Parameters
    ----------
    path : str or Path
        The file; its suffix (case-insensitive) chooses the reader.
    display_name : str, optional
        How problems name the file (default: ``str(path)``).

    Returns
    -------
    DataFrame
        Columns as in the header (names stripped of surrounding blanks), cells as read,
        index ``source_row`` = 1-based file row.

    Raises
    ------
    InputError
        Unknown suffix, missing/unreadable file, no header, no data rows, duplicate or empty
        column names, or rows with more cells than the header.
    """
    path = Path(path)
    name = display_name if display_name is not None else str(path)
    reader = TABLE_READERS.get(path.suffix.lower())
    if reader is None:
        raise InputError(
            Problem(
                name,
                f"unknown table format '{path.suffix or '(no suffix)'}'",
                "save the table as " + ", ".join(sorted(TABLE_READERS)) + " and name it so",
            )
        )
    if not path.is_file():
        raise InputError(Problem(name, "file not found", "check the file name and folder"))
    return reader(path, name)


def _read_delimited(path: Path, name: str, delimiter: str) -> pd.DataFrame:
    try:
        with open(path, encoding="utf-8-sig", newline="") as handle:
            reader = csv.reader(handle, delimiter=delimiter, strict=True)
            records: list[tuple[int, list[str]]] = []
            line = 0
            for cells in reader:
                start = line + 1
                line = reader.line_num
                records.append((start, cells))
    except UnicodeDecodeError as error:
        raise InputError(
            Problem(
                name,
                f"not a readable text table (byte {error.start} is not UTF-8)",
                "export the table as UTF-8 text (csv/tsv), or use .xlsx or .parquet",
            )
        ) from None
    except csv.Error as error:
        raise InputError(
            Problem(name, f"malformed text table: {error}", "check quotes in the file", row=line + 1)
        ) from None
    except OSError as error:
        raise InputError(Problem(name, f"cannot read the file: {error.strerror}", "check permissions")) from None
    rows = [(row, [_none_if_blank(c) for c in cells]) for row, cells in records]
    return _frame_from_rows(rows, name, delimiter=delimiter)


def _read_csv(path: Path, name: str) -> pd.DataFrame:
    return _read_delimited(path, name, ",")


def _read_tsv(path: Path, name: str) -> pd.DataFrame:
    return _read_delimited(path, name, "\t")


def _read_xlsx(path: Path, name: str) -> pd.DataFrame:
    import openpyxl

    try:
        workbook = openpyxl.load_workbook(path, read_only=True, data_only=True)
    except (zipfile.BadZipFile, KeyError, OSError, ValueError, TypeError) as error:
        raise InputError(
            Problem(
                name,
                f"not a readable .xlsx workbook ({type(error).__name__})",
                "open and re-save it as an Excel .xlsx workbook, or export it as csv",
            )
        ) from None
    try:
        if not workbook.worksheets:
            raise InputError(Problem(name, "the workbook has no sheet", "put the table on the first sheet"))
        sheet = workbook.worksheets[0]
        rows = [
            (number, [_none_if_blank(c) for c in cells])
            for number, cells in enumerate(sheet.iter_rows(min_row=1, values_only=True), start=1)
        ]
    finally:
        workbook.close()
    return _frame_from_rows(rows, name)


def _read_parquet(path: Path, name: str) -> pd.DataFrame:
    try:
        table = pd.read_parquet(path)
    except Exception as error:  # pyarrow raises several types for a corrupt file
        raise InputError(
            Problem(
                name,
                f"not a readable parquet file ({type(error).__name__})",
                "write it again as parquet, or export it as csv",
            )
        ) from None
    table = table.reset_index(drop=True)
    table.columns = [str(c).strip() for c in table.columns]
    problems = _header_problems(list(table.columns), name, header_row=1)
    if table.empty:
        problems.append(Problem(name, "the table has no data rows", "add the data rows"))
    if problems:
        raise InputError(problems)
    table.index = pd.RangeIndex(2, len(table) + 2, name=ROW_INDEX_NAME)
    return table


#: suffix -> reader(path, display_name)
TABLE_READERS: dict[str, Callable[[Path, str], pd.DataFrame]] = {
    ".csv": _read_csv,
    ".tsv": _read_tsv,
    ".xlsx": _read_xlsx,
    ".parquet": _read_parquet,
}
TABLE_SUFFIXES = tuple(sorted(TABLE_READERS))


def _none_if_blank(cell):
    if cell is None:
        return None
    if isinstance(cell, str) and cell.strip() == "":
        return None
    return cell


def _frame_from_rows(
    rows: Iterable[tuple[int, list]], name: str, delimiter: str | None = None
) -> pd.DataFrame:
    """Header = first non-blank row; later blank rows are skipped, numbering kept."""
    filled = [(number, cells) for number, cells in rows if any(c is not None for c in cells)]
    if not filled:
        raise InputError(Problem(name, "the file is empty", "add a header row and data rows"))
    header_row, header_cells = filled[0]
    body = filled[1:]
    # drop trailing empty header cells (spreadsheets often carry them)
    while header_cells and header_cells[-1] is None:
        header_cells = header_cells[:-1]
    header = ["" if c is None else str(c).strip() for c in header_cells]
    problems = _header_problems(header, name, header_row)
    if len(header) == 1 and delimiter is not None:
        for other, label in ((";", "semicolons"), ("\t", "tabs"), (",", "commas")):
            if other != delimiter and other in header[0]:
                problems.append(
                    Problem(
                        name,
                        f"the header has one column and looks separated by {label}",
                        "save the table with the separator its suffix says "
                        "(.csv: commas, .tsv: tabs)",
                        row=header_row,
                    )
                )
                break
    width = len(header)
    data: list[list] = []
    numbers: list[int] = []
    for number, cells in body:
        extra = [c for c in cells[width:] if c is not None]
        if extra:
            problems.append(
                Problem(
                    name,
                    f"the row has {len(cells)} cells but the header has {width} columns",
                    "remove the extra cells or add a column name for them",
                    row=number,
                )
            )
        data.append(list(cells[:width]) + [None] * max(0, width - len(cells)))
        numbers.append(number)
    if not body:
        problems.append(Problem(name, "the table has a header but no data rows", "add the data rows"))
    if problems:
        raise InputError(problems)
    frame = pd.DataFrame(data, columns=header, dtype=object)
    frame.index = pd.Index(numbers, name=ROW_INDEX_NAME)
    return frame


def _header_problems(header: list[str], name: str, header_row: int) -> list[Problem]:
    problems = []
    seen: set[str] = set()
    for position, column in enumerate(header, start=1):
        if column == "":
            problems.append(
                Problem(name, f"column {position} of the header has no name", "give every column a name", row=header_row)
            )
        elif column in seen:
            problems.append(
                Problem(name, "the column name appears twice in the header", "rename one of them",
                        row=header_row, column=column)
            )
        seen.add(column)
    return problems
