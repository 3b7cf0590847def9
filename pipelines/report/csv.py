"""CSV copies of the run's Parquet tables, for spreadsheets and tools without Parquet.

Each ``X.parquet`` of a run folder gets ``X.csv`` beside it: comma-separated, UTF-8, one
header row, no index, ``\\n`` line ends, floats to :data:`SIGNIFICANT_DIGITS` significant
digits (full precision stays in the Parquet table), missing values as empty cells, list cells
joined with ``"; "``. Same table, same bytes. A table declared ``with_csv`` (the per-sample
table) gets its copy from its stage already (:func:`table_csv_text` too); the exports leave
that copy as it is and write it only when it is missing (a folder written before).
"""

from __future__ import annotations

import csv
import io
import pathlib

import numpy as np
import pandas as pd
import pyarrow.parquet as pq

from pipelines.outputs_schema import table_for_path
from pipelines.runfolder import atomic_write_text

__all__ = ["parquet_tables", "table_csv_text", "write_csv_beside", "SIGNIFICANT_DIGITS"]

#: significant digits of a float in a CSV copy (a spreadsheet's view; Parquet keeps all)
SIGNIFICANT_DIGITS = 6

#: the float format of a CSV copy
FLOAT_FORMAT = f"%.{SIGNIFICANT_DIGITS}g"


def parquet_tables(run_dir: pathlib.Path) -> list[pathlib.Path]:
    """Every Parquet file of a run folder (hidden and temporary files excluded), sorted."""
    root = pathlib.Path(run_dir)
    return sorted(p for p in root.rglob("*.parquet")
                  if not any(part.startswith(".") for part in p.relative_to(root).parts))


def _flatten(value):
    if isinstance(value, (list, tuple, np.ndarray)):
        return "; ".join(str(v) for v in value)
    return value


def table_csv_text(table: pd.DataFrame) -> str:
    """A DataFrame as downcore's CSV text: the bytes of ``DataFrame.to_csv`` (no index, ``\\n``
    line ends, ``%.6g`` floats, missing values empty), with the float columns formatted in one
    pass each (the ensemble tables hold ~1 M numbers) and the other columns by pandas."""
    table = table.copy()
    for column in table.columns:
        if table[column].dtype == object:
            table[column] = table[column].map(_flatten)
    floats = [isinstance(dtype, np.dtype) and dtype.kind == "f" for dtype in table.dtypes]
    if not any(floats) or table.columns.nlevels != 1 or not len(table):
        return _pandas_csv_text(table)
    cells: list[list[str]] = []
    other_columns, quoted = _other_columns(table, floats)
    others = iter(other_columns)
    for position, is_float in enumerate(floats):
        cells.append(_float_cells(table.iloc[:, position].to_numpy()) if is_float else next(others))
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")  # pandas writes through the same writer
    writer.writerow([str(c) for c in table.columns])
    if quoted or len(cells) < 2:
        writer.writerows(zip(*cells))
    else:  # no cell needs quoting (a float's never does; pandas quoted none of the others)
        buffer.write("\n".join(map(",".join, zip(*cells))) + "\n")
    return buffer.getvalue()


def _copied_by_stage(root: pathlib.Path, path: pathlib.Path) -> bool:
    spec = table_for_path(path.relative_to(root).as_posix())
    return spec is not None and spec.with_csv


def _pandas_csv_text(table: pd.DataFrame) -> str:
    buffer = io.StringIO()
    table.to_csv(buffer, index=False, lineterminator="\n", float_format=FLOAT_FORMAT)
    return buffer.getvalue()


def _float_cells(values: np.ndarray) -> list[str]:
    """``%.6g`` of every value, missing values empty (as pandas writes them)."""
    cells = list(map(FLOAT_FORMAT.__mod__, values.tolist()))
    for i in np.flatnonzero(np.isnan(values)).tolist():
        cells[i] = ""
    return cells


def _other_columns(table: pd.DataFrame, floats: list[bool]) -> tuple[list[list[str]], bool]:
    """The cells of the columns that are not floats, as pandas formats them (written by pandas
    and read back), and whether pandas quoted any of them."""
    positions = [i for i, is_float in enumerate(floats) if not is_float]
    if not positions:
        return [], False
    text = table.iloc[:, positions].to_csv(index=False, header=False, lineterminator="\n")
    rows = list(csv.reader(io.StringIO(text, newline="")))
    return ([list(column) for column in zip(*rows)] if rows else [[] for _ in positions]), '"' in text


def write_csv_beside(run_dir: str | pathlib.Path,
                     unreadable: list[str] | None = None) -> list[pathlib.Path]:
    """Write ``X.csv`` beside every ``X.parquet`` of the run folder; return the CSV paths.

    A Parquet file that cannot be read (truncated, not Parquet) gets no CSV copy; a sentence
    naming it and the reader's error is appended to ``unreadable`` when given.
    """
    written, root = [], pathlib.Path(run_dir)
    for path in parquet_tables(root):
        if path.with_suffix(".csv").is_file() and _copied_by_stage(root, path):
            continue
        try:
            table = pq.read_table(path).to_pandas()
        except (OSError, ValueError) as error:  # pyarrow's ArrowInvalid is a ValueError
            if unreadable is not None:
                unreadable.append(f"{path} cannot be read as Parquet ({error}); no CSV copy written")
            continue
        written.append(atomic_write_text(path.with_suffix(".csv"), table_csv_text(table)))
    return written
