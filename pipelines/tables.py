"""Read a table file into a DataFrame: one small reader per format behind :func:`read_table`.

Supported: ``.csv`` (comma), ``.tsv`` (tab), ``.txt`` (tab, else runs of blanks), ``.xlsx``
(see :mod:`pipelines.sheets` for which sheet and which cells) and ``.parquet`` (a named index
is a column; list or record columns are refused by name). Text files are decoded by
:mod:`pipelines.textfiles` (UTF-8, byte-order marks accepted). ``#`` lines before the header,
and in sheets single-cell title rows above it, are skipped and listed in
``frame.attrs["notes"]``. Every
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
from collections.abc import Callable, Iterable
from pathlib import Path

import pandas as pd

from proxies.problems import InputError, Problem

from pipelines.sheets import read_sheet_rows
from pipelines.textfiles import decode_text

__all__ = ["read_table", "TABLE_SUFFIXES"]

ROW_INDEX_NAME = "source_row"


def read_table(path: str | Path, display_name: str | None = None, sheet: str | None = None) -> pd.DataFrame:
    """Read one table file.

    Parameters
    ----------
    path : str or Path
        The file; its suffix (case-insensitive) chooses the reader.
    display_name : str, optional
        How problems name the file (default: ``str(path)``).
    sheet : str, optional
        ``.xlsx`` only: the sheet to read (default: the active visible sheet).

    Returns
    -------
    DataFrame
        Columns as in the header (names stripped of surrounding blanks), cells as read,
        index ``source_row`` = 1-based file row. ``frame.attrs["notes"]`` lists what was
        skipped on the way (comment lines, title rows, the sheet read).

    Raises
    ------
    InputError
        Unknown suffix, missing/unreadable file, a folder, no header, no data rows,
        duplicate or empty column names, or rows with more cells than the header.
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
    if path.is_dir():
        raise InputError(Problem(name, "is a folder, not a table file", "name the table file itself"))
    if not path.is_file():
        raise InputError(Problem(name, "file not found", "check the file name and folder"))
    if sheet is not None and path.suffix.lower() != ".xlsx":
        raise InputError(Problem(name, f"a sheet ({sheet!r}) is named but the file is not an .xlsx workbook",
                                 "remove sheet = ... from [files], or give the workbook"))
    if path.suffix.lower() == ".xlsx":
        return _read_xlsx(path, name, sheet)
    return reader(path, name)


def _text_lines(path: Path, name: str) -> list[str]:
    try:
        raw = path.read_bytes()
    except OSError as error:
        raise InputError(Problem(name, f"cannot read the file: {error.strerror}", "check permissions")) from None
    return decode_text(raw, name).splitlines(keepends=True)


def _read_delimited(path: Path, name: str, delimiter: str) -> pd.DataFrame:
    lines = _text_lines(path, name)
    records: list[tuple[int, list[str]]] = []
    reader = csv.reader(lines, delimiter=delimiter, strict=True)
    line = 0
    try:
        for cells in reader:
            start = line + 1
            line = reader.line_num
            records.append((start, cells))
    except csv.Error as error:
        raise InputError(
            Problem(name, f"malformed text table: {error}", "check quotes in the file", row=line + 1)
        ) from None
    rows = [(row, [_none_if_blank(c) for c in cells]) for row, cells in records]
    return _frame_from_rows(rows, name, delimiter=delimiter)


def _read_csv(path: Path, name: str) -> pd.DataFrame:
    return _read_delimited(path, name, ",")


def _read_tsv(path: Path, name: str) -> pd.DataFrame:
    return _read_delimited(path, name, "\t")


def _read_txt(path: Path, name: str) -> pd.DataFrame:
    """Tab-separated when the header line holds a tab, else separated by runs of blanks."""
    lines = _text_lines(path, name)
    header = next((line for line in lines if line.strip() and not line.lstrip().startswith("#")), "")
    if "\t" in header:
        return _read_delimited(path, name, "\t")
    rows = [(number, [_none_if_blank(c) for c in line.split()]) for number, line in enumerate(lines, start=1)]
    return _frame_from_rows(rows, name, delimiter=" ")


def _read_xlsx(path: Path, name: str, sheet: str | None = None) -> pd.DataFrame:
    rows, description, others = read_sheet_rows(path, name, sheet)
    rows = [(number, [_none_if_blank(c) for c in cells]) for number, cells in rows]
    try:
        frame = _frame_from_rows(rows, name, skip_titles=True)
    except InputError as error:
        raise InputError([_name_the_sheet(p, description, others) for p in error.problems]) from None
    frame.attrs["notes"] = [f"{name}: read {description}"] + frame.attrs.get("notes", [])
    return frame


def _name_the_sheet(problem: Problem, description: str, others: str) -> Problem:
    """An empty-sheet problem says which sheet was read and which others there are."""
    if "no data" not in problem.message and "empty" not in problem.message:
        return problem
    return Problem(problem.file, f"{problem.message}: read {description}; the workbook's sheets: {others}",
                   problem.fix + '; if the table is on another sheet, name it in core.toml [files], e.g. '
                   'samples = { file = "book.xlsx", sheet = "Data" }', row=problem.row, column=problem.column)


def _read_parquet(path: Path, name: str) -> pd.DataFrame:
    import pyarrow.parquet as pq
    import pyarrow.types as pat

    try:
        schema = pq.read_schema(path)
        table = pd.read_parquet(path)
    except Exception as error:  # pyarrow raises several types for a corrupt file
        raise InputError(
            Problem(
                name,
                f"not a readable parquet file ({type(error).__name__})",
                "write it again as parquet, or export it as csv",
            )
        ) from None
    nested = [field.name for field in schema
              if pat.is_nested(field.type) or pat.is_dictionary(field.type) and pat.is_nested(field.type.value_type)]
    if nested:
        raise InputError([Problem(name, "the column holds lists or records, not one value per cell",
                                  "store one number or text per cell (one column per value)", row=1, column=column)
                          for column in nested])
    if any(level is not None for level in table.index.names):
        table = table.reset_index()  # an index with a name is a column the writer stored as index
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
    ".txt": _read_txt,
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


def _is_comment(cells: list) -> bool:
    first = next((c for c in cells if c is not None), None)
    return isinstance(first, str) and first.lstrip().startswith("#")


def _row_span(numbers: list[int]) -> str:
    return f"row {numbers[0]}" if len(numbers) == 1 else f"rows {numbers[0]}-{numbers[-1]}"


def _leading_skips(filled: list[tuple[int, list]], skip_titles: bool) -> tuple[list, list[str]]:
    """Drop ``#`` lines before the header (and, in sheets, one-cell title rows); say so."""
    comments, titles = [], []
    while filled and _is_comment(filled[0][1]):
        comments.append(filled.pop(0)[0])
    while (skip_titles and len(filled) > 1 and sum(c is not None for c in filled[0][1]) == 1
           and sum(c is not None for c in filled[1][1]) > 1):
        titles.append(filled.pop(0)[0])
        while filled and _is_comment(filled[0][1]):
            comments.append(filled.pop(0)[0])
    notes = []
    if comments:
        notes.append(f"{_row_span(comments)}: {len(comments)} '#' comment line(s) before the header, skipped")
    if titles:
        notes.append(f"{_row_span(titles)}: title row(s) with a single filled cell above the header, skipped")
    return filled, notes


def _frame_from_rows(
    rows: Iterable[tuple[int, list]], name: str, delimiter: str | None = None, skip_titles: bool = False
) -> pd.DataFrame:
    """Header = first non-blank row after leading comments; later blank rows are skipped,
    numbering kept."""
    filled = [(number, cells) for number, cells in rows if any(c is not None for c in cells)]
    filled, notes = _leading_skips(filled, skip_titles)
    if not filled:
        raise InputError(Problem(name, "the file is empty" + (" (only comment lines)" if notes else ""),
                                 "add a header row and data rows"))
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
                        "(.csv: commas, .tsv: tabs, .txt: tabs or blanks)",
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
    frame.attrs["notes"] = [f"{name}, {note}" for note in notes]
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
