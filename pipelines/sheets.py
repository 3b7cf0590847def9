"""Read one sheet of an Excel ``.xlsx`` workbook as the rows a user sees.

Rules (each one a lab spreadsheet broke once):

- the sheet read is the one named in ``[files]`` (``{ file = "...", sheet = "..." }``), else
  the workbook's active sheet when it is visible, else its first visible sheet; hidden sheets
  are never read unless named;
- only the cells that hold something are read: the stored dimension of a sheet is ignored
  (one space typed in the far corner cell would otherwise mean ~17 billion cells), rows are
  streamed, and a sheet with more than :data:`MAX_ROWS` filled rows or a row wider than
  :data:`MAX_COLUMNS` filled columns is refused;
- a formula cell is read by its cached value; one without a cached value (a workbook saved
  by a program that does not compute formulas) is named as such, never read as empty.
"""

from __future__ import annotations

import zipfile
from pathlib import Path

from proxies.problems import InputError, Problem

__all__ = ["read_sheet_rows", "MAX_ROWS", "MAX_COLUMNS"]

#: most filled rows read from one sheet
MAX_ROWS = 1_000_000
#: most columns up to the last filled cell of one row
MAX_COLUMNS = 2_000


def _open(path: Path, name: str, data_only: bool):
    import openpyxl

    try:
        return openpyxl.load_workbook(path, read_only=True, data_only=data_only)
    except (zipfile.BadZipFile, KeyError, OSError, ValueError, TypeError, IndexError) as error:
        raise InputError(Problem(name, f"not a readable .xlsx workbook ({type(error).__name__})",
                                 "open and re-save it as an Excel .xlsx workbook, or export it as csv")) from None


def _sheet_list(workbook) -> str:
    return ", ".join(f"'{ws.title}'" + (" (hidden)" if ws.sheet_state != "visible" else "")
                     for ws in workbook.worksheets)


def _choose(workbook, name: str, sheet: str | None):
    if not workbook.worksheets:
        raise InputError(Problem(name, "the workbook has no sheet", "put the table on a sheet"))
    if sheet is not None:
        titles = [ws.title for ws in workbook.worksheets]
        if sheet not in titles:
            from proxies.settings_spec import did_you_mean

            hint = did_you_mean(sheet, titles)
            raise InputError(Problem(name, f"the workbook has no sheet {sheet!r}" + (f" ({hint})" if hint else ""),
                                     "name one of its sheets: " + _sheet_list(workbook)))
        return workbook[sheet], "named in [files]"
    active = workbook.active
    if active is not None and active.sheet_state == "visible":
        return active, "the active sheet"
    visible = [ws for ws in workbook.worksheets if ws.sheet_state == "visible"]
    if not visible:
        raise InputError(Problem(name, "every sheet of the workbook is hidden",
                                 "unhide the sheet with the table, or name it in [files]"))
    return visible[0], "the first visible sheet"


def _filled_rows(worksheet):
    """(row number, {column: value}) of the rows stored in the sheet, blank cells left out.

    Reads the sheet's XML rows as stored (openpyxl's row parser), so neither the stored
    dimension nor the gaps between stored rows cost anything.
    """
    from openpyxl.worksheet._reader import WorkSheetParser

    book = worksheet.parent
    with worksheet._get_source() as source:
        parser = WorkSheetParser(source, worksheet._shared_strings, data_only=book.data_only, epoch=book.epoch,
                                 date_formats=book._date_formats, timedelta_formats=book._timedelta_formats)
        for number, cells in parser.parse():
            values = {cell["column"]: cell["value"] for cell in cells
                      if cell["value"] is not None and not (isinstance(cell["value"], str) and not cell["value"].strip())}
            if values:
                yield number, values


def _stream(worksheet, name: str, where: str):
    """(row number, cells) of the filled rows, cells up to the last filled one."""
    count = 0
    for number, values in _filled_rows(worksheet):
        count += 1
        if count > MAX_ROWS:
            raise InputError(Problem(name, f"{where} has more than {MAX_ROWS} filled rows",
                                     "keep one table of samples per sheet"))
        width = max(values)
        if width > MAX_COLUMNS:
            raise InputError(Problem(name, f"{where} has a cell in column {width}, far right of any "
                                     "table", "delete the stray cell (select the columns right of the "
                                     "table and delete them)", row=number))
        yield number, [values.get(column) for column in range(1, width + 1)]


def _missing_formula_values(path: Path, name: str, title: str, rows: dict[int, list]) -> list[Problem]:
    """Formula cells whose cached value is missing (they were read as empty)."""
    from openpyxl.utils import get_column_letter

    workbook = _open(path, name, data_only=False)
    problems = []
    try:
        for number, cells in _stream(workbook[title], name, f"sheet '{title}'"):
            values = rows.get(number, [])
            for position, cell in enumerate(cells):
                cached = values[position] if position < len(values) else None
                if isinstance(cell, str) and cell.startswith("=") and cached is None:
                    problems.append(Problem(
                        name, f"cell {get_column_letter(position + 1)}{number} of sheet '{title}' holds the "
                              f"formula {cell[:40]!r} with no saved value",
                        "open the workbook in a spreadsheet program, let it calculate and save it "
                        "(or paste the values)", row=number))
    finally:
        workbook.close()
    return problems


def read_sheet_rows(path: Path, name: str, sheet: str | None = None) -> tuple[list[tuple[int, list]], str, str]:
    """The filled rows of the chosen sheet.

    Returns
    -------
    rows : list of (int, list)
        1-based sheet row number and its cells (values as stored).
    description : str
        Which sheet was read and why, e.g. ``"sheet 'Data' (the active sheet)"``.
    others : str
        The workbook's sheets, for messages.

    Raises
    ------
    InputError
        Unreadable workbook, unknown sheet name, all sheets hidden, too many rows or columns,
        or formula cells without a saved value.
    """
    workbook = _open(path, name, data_only=True)
    try:
        worksheet, why = _choose(workbook, name, sheet)
        description = f"sheet '{worksheet.title}' ({why})"
        rows = list(_stream(worksheet, name, description))
        title, others = worksheet.title, _sheet_list(workbook)
    finally:
        workbook.close()
    problems = _missing_formula_values(path, name, title, dict(rows))
    if problems:
        raise InputError(problems)
    return rows, description, others
