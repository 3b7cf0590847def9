"""The run folder's contract: every table a run writes, declared once.

Each :class:`OutputTable` names its file (relative to the run folder, ``<core>`` standing for
a core folder and ``<name>`` for a training set), its columns with dtype, units, meaning and
whether they are required, and column families (e.g. the ensemble members ``m0000``,
``m0001``, ...). The writers (:mod:`pipelines.flows.stages`, :mod:`pipelines.flows.run`)
check every table against it before writing (:func:`checked`); the report's reader
(:mod:`pipelines.report.rundata`), the netCDF export, ``downcore compare`` and the test
factory read the names from here, so no reader guesses a column name. The README's table of
run-folder files is generated from these declarations (:func:`markdown_table`,
``python -m pipelines.outputs_schema README.md``) and a test checks it.

The declarations live in :mod:`pipelines.outputs_tables`; adding a table is one declaration there (see DEVELOPERS.md, "A new output
table").

dtypes are logical: ``float``, ``int``, ``number`` (int or float: counts that may be
missing), ``string``, ``bool``. A column whose cells are all missing (Arrow type ``null``)
fits any dtype, and so does any column of a table with no rows.
"""

from __future__ import annotations

import re
import sys
from pathlib import Path

import pandas as pd

from pipelines.outputs_tables import CORE_TABLES, TABLES, Column, Family, OutputTable
from proxies.members import member_column_names, member_columns_of

__all__ = ["Column", "Family", "OutputTable", "TABLES", "SchemaError", "table", "columns_of",
           "member_columns", "member_column_names", "checked", "frame_problems", "file_problems",
           "table_for_path", "run_folder_problems", "markdown_table", "refresh_readme", "CORE_TABLES"]

_ARROW_KINDS = {
    "float": ("double", "float", "halffloat"),
    "int": ("int8", "int16", "int32", "int64", "uint8", "uint16", "uint32", "uint64"),
    "string": ("string", "large_string"),
    "bool": ("bool",),
}
_ARROW_KINDS["number"] = _ARROW_KINDS["float"] + _ARROW_KINDS["int"]


class SchemaError(ValueError):
    """A writer produced a table that breaks the run-folder contract (a bug, not bad input)."""


def table(key: str) -> OutputTable:
    """The declaration of table ``key`` (e.g. ``"dates"``)."""
    try:
        return TABLES[key]
    except KeyError:
        raise KeyError(f"no run-folder table {key!r}; declared: {', '.join(sorted(TABLES))}") from None


def columns_of(key: str) -> tuple[str, ...]:
    """Declared column names of table ``key`` in order (families not included)."""
    return table(key).names


def member_columns(frame: pd.DataFrame) -> list[str]:
    """The member columns of an ensemble table, in file order."""
    return member_columns_of(frame.columns)


def _dtype_fits(kind: str, arrow_type: str) -> bool:
    return arrow_type == "null" or arrow_type in _ARROW_KINDS[kind]


def _problems(spec: OutputTable, names: list[str], types: list[str], n_rows: int,
              where: str = "") -> list[str]:
    where = where or spec.path
    problems = [f"{where}: column {name!r} is not declared in the run-folder schema"
                for name in names if spec.column(name) is None]
    problems += [f"{where}: required column {name!r} is missing"
                 for name in spec.required if name not in names]
    if n_rows:
        for name, arrow_type in zip(names, types):
            declared = spec.column(name)
            if declared is not None and not _dtype_fits(declared.dtype, arrow_type):
                problems.append(f"{where}: column {name!r} is {arrow_type}, declared {declared.dtype}")
    return problems


def frame_problems(key: str, frame: pd.DataFrame) -> list[str]:
    """Ways ``frame`` breaks the declaration of table ``key`` (empty when it fits)."""
    import pyarrow as pa

    arrow = pa.Table.from_pandas(frame, preserve_index=False)
    return _problems(table(key), [str(n) for n in arrow.schema.names],
                     [str(t) for t in arrow.schema.types], len(frame))


def checked(key: str, frame: pd.DataFrame) -> pd.DataFrame:
    """``frame`` unchanged if it fits the declaration of ``key``; raises :class:`SchemaError`
    otherwise (what every writer calls before writing)."""
    problems = frame_problems(key, frame)
    if problems:
        raise SchemaError("; ".join(problems) + " -- declare the column in pipelines/outputs_tables.py")
    return frame


def table_for_path(relative_path: str) -> OutputTable | None:
    """The declaration a run-folder file belongs to (``None`` for files that are not tables)."""
    for spec in TABLES.values():
        if spec.path_pattern().fullmatch(relative_path):
            return spec
    return None


def file_problems(path: Path, spec: OutputTable, where: str = "") -> list[str]:
    """Ways a written file breaks its declaration (``where`` names it in the messages)."""
    import pyarrow.parquet as pq

    if spec.file_format == "csv":
        header = pd.read_csv(path, nrows=0).columns
        return _problems(spec, list(header), [], 0, where)
    meta = pq.read_metadata(path)
    schema = meta.schema.to_arrow_schema()
    return _problems(spec, list(schema.names), [str(t) for t in schema.types], meta.num_rows, where)


def run_folder_problems(run_dir: str | Path) -> list[str]:
    """Every Parquet file of a run folder that no declaration covers or that breaks its
    declaration (the CSV copies and the report are exports, not tables)."""
    root = Path(run_dir)
    problems = []
    for path in sorted(root.rglob("*.parquet")):
        relative = path.relative_to(root).as_posix()
        spec = table_for_path(relative)
        if spec is None:
            problems.append(f"{relative}: file not declared in the run-folder schema")
        else:
            problems += file_problems(path, spec, relative)
    return problems


def _cell(text: str) -> str:
    return text.replace("|", "\\|")


def markdown_table() -> str:
    """The README's table of run-folder tables and their columns."""
    lines = ["| file | column | type | units | meaning |", "|---|---|---|---|---|"]
    for spec in TABLES.values():
        copy = f" (+ `{spec.csv_file_name}`, written with it)" if spec.with_csv else ""
        lines.append(f"| `{spec.path}`{copy} | | | | {_cell(spec.doc)} |")
        for column in spec.columns:
            name = f"`{column.name}`" + ("" if column.name in spec.required else " (optional)")
            lines.append(f"| | {name} | {column.dtype} | {_cell(column.units)} | {_cell(column.doc)} |")
        for family in spec.families:
            lines.append(f"| | `{family.example}` … | {family.dtype} | {_cell(family.units)} | {_cell(family.doc)} |")
    return "\n".join(lines) + "\n"


_BLOCK = re.compile(r"(<!-- tables:run-folder -->\n)(?P<body>.*?)(<!-- /tables -->)", re.S)


def refresh_readme(text: str) -> str:
    """``text`` with the marked run-folder table regenerated."""
    return _BLOCK.sub(lambda m: m.group(1) + markdown_table() + m.group(3), text)


if __name__ == "__main__":  # pragma: no cover - a maintenance command
    readme = Path(sys.argv[1] if len(sys.argv) > 1 else "README.md")
    readme.write_text(refresh_readme(readme.read_text(encoding="utf-8")), encoding="utf-8")
