"""read_table: one reader per format, cells kept as read, 1-based file rows, clear errors."""

import datetime

import openpyxl
import pandas as pd
import pytest

from pipelines.tables import read_table
from proxies.problems import InputError


def problems_of(path, **kwargs):
    with pytest.raises(InputError) as caught:
        read_table(path, **kwargs)
    return caught.value.problems


def test_csv_cells_are_kept_as_text_and_rows_are_file_lines(tmp_path):
    path = tmp_path / "t.csv"
    # blank line 3 is skipped but counted; a quoted cell spanning two lines starts on line 5
    path.write_text('depth_cm,label,value\n1.0,007,1e3\n\n2.0,"two\nlines",\n3.0,x, 4 \n', encoding="utf-8")
    table = read_table(path)
    assert list(table.columns) == ["depth_cm", "label", "value"]
    assert table.index.tolist() == [2, 4, 6]
    assert table.index.name == "source_row"
    assert table.loc[2, "label"] == "007"  # not coerced to a number
    assert table.loc[2, "value"] == "1e3"
    assert table.loc[4, "value"] is None  # empty cell -> missing
    assert table.loc[6, "value"] == " 4 "
    assert table.loc[4, "label"] == "two\nlines"


def test_csv_with_bom_and_short_rows(tmp_path):
    path = tmp_path / "t.csv"
    path.write_bytes("\ufeffdepth_cm , a\n1,2\n3\n".encode("utf-8"))
    table = read_table(path)
    assert list(table.columns) == ["depth_cm", "a"]
    assert table.loc[3, "a"] is None


def test_tsv(tmp_path):
    path = tmp_path / "t.tsv"
    path.write_text("depth_cm\tkind\n5\tcalendar\n")
    table = read_table(path)
    assert table.loc[2].tolist() == ["5", "calendar"]


def test_xlsx_first_sheet_keeps_cell_types_and_sheet_rows(tmp_path):
    path = tmp_path / "t.xlsx"
    workbook = openpyxl.Workbook()
    sheet = workbook.active
    sheet.append(["depth_cm", "uk37", "note"])
    sheet.append([1.5, 0.41, None])
    sheet.append([None, None, None])  # blank row 3
    sheet.append([2, "n.d.", "text"])
    sheet.append([3, datetime.datetime(2020, 1, 1), None])
    workbook.create_sheet("other").append(["ignored"])
    workbook.save(path)
    table = read_table(path)
    assert table.index.tolist() == [2, 4, 5]
    assert table.loc[2, "uk37"] == pytest.approx(0.41)
    assert table.loc[4, "uk37"] == "n.d."
    assert isinstance(table.loc[5, "uk37"], datetime.datetime)
    assert table.loc[2, "note"] is None


def test_parquet_rows_are_numbered_as_if_the_header_were_row_1(tmp_path):
    path = tmp_path / "t.parquet"
    pd.DataFrame({"depth_cm": [1.0, 2.0, 3.0], "uk37": ["0.4", "x", None]}).to_parquet(path, index=False)
    table = read_table(path)
    assert table.index.tolist() == [2, 3, 4]
    assert table["depth_cm"].dtype.kind == "f"
    assert table.loc[3, "uk37"] == "x"


@pytest.mark.parametrize(
    "name, content, words",
    [
        ("t.dat", b"a,b\n1,2\n", "unknown table format"),
        ("t.csv", b"", "empty"),
        ("t.csv", b"\n\n", "empty"),
        ("t.csv", b"depth_cm,uk37\n", "no data rows"),
        ("t.csv", b"\x89PNG\r\n\x1a\n\x00\xff", "not a text file"),
        ("t.csv", b"depth_cm,note\n1,caf\xe9\n", "not UTF-8 text"),
        ("t.csv", b"a,a\n1,2\n", "appears twice"),
        ("t.csv", b"a,,b\n1,2,3\n", "has no name"),
        ("t.csv", b"a,b\n1,2,3\n", "3 cells"),
        ("t.csv", b"a;b\n1;2\n", "semicolons"),
        ("t.xlsx", b"a,b\n1,2\n", "not a readable .xlsx"),
        ("t.parquet", b"PAR1 broken", "not a readable parquet"),
    ],
)
def test_bad_files_raise_input_error_naming_the_file(tmp_path, name, content, words):
    path = tmp_path / name
    path.write_bytes(content)
    problems = problems_of(path, display_name=f"core/{name}")
    assert problems and all(p.file == f"core/{name}" for p in problems)
    assert any(words in p.message for p in problems)
    assert all(p.fix for p in problems)


def test_missing_file_and_row_of_extra_cells(tmp_path):
    assert "not found" in problems_of(tmp_path / "absent.csv")[0].message
    path = tmp_path / "t.csv"
    path.write_text("a,b\n1,2\n1,2,3\n")
    (problem,) = problems_of(path)
    assert problem.row == 3
