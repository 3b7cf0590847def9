"""A generated corpus of hostile inputs: careless users and messy lab files (all invented).

Each case starts from a copy of ``tests/data/good_core`` inside a small project (run config,
an invented straight calibration curve) and changes one thing. A case either expects a
rejection -- a problem naming the file (and row / column or key where given) whose message
holds some words -- or an acceptance, with a check of what was read.
"""

from __future__ import annotations

import decimal
import os
import shutil
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import pandas as pd

DATA = Path(__file__).parent / "data"
#: invented straight curve, 0-30 000 cal BP (14C = 0.9 cal + 50)
STRAIGHT_CURVE = "".join(f"{cal}, {cal * 0.9 + 50:.0f}, 15, 0, 1\n" for cal in range(0, 30001, 50))
RUN = '[run]\nseed = 5\nensemble = 50\ncores = ["cores/*"]\n\n[curves]\natmosphere = "curves/atm.14c"\n'


@dataclass(frozen=True)
class Case:
    """One hostile input: ``change(project, core)``, then either ``reject`` or ``accept``."""

    name: str
    change: Callable[[Path, Path], None]
    file: str | None = None          # file name that must be named (basename), None = accept
    row: int | None = None
    column: str | None = None
    words: str = ""
    accept: Callable | None = None   # predicate on the loaded core (acceptance cases)


def make_project(root: Path) -> tuple[Path, Path]:
    """A project with one good core; returns (run config, core folder)."""
    core = root / "cores" / "GOOD-1"
    shutil.copytree(DATA / "good_core", core)
    (root / "curves").mkdir()
    (root / "curves" / "atm.14c").write_text(STRAIGHT_CURVE)
    (root / "run.toml").write_text(RUN)
    return root / "run.toml", core


# --- small editing helpers --------------------------------------------------------------------
def _replace(name: str, old: str, new: str, count: int = 1):
    def change(project: Path, core: Path) -> None:
        path = (core if name != "run.toml" else project) / name
        text = path.read_text()
        assert old in text, (name, old)
        path.write_text(text.replace(old, new, count))
    return change


def cell(name: str, row: int, column: str, value: str):
    """Set one cell of a csv table of the core (row = file row, header = 1)."""
    def change(project: Path, core: Path) -> None:
        lines = (core / name).read_text().splitlines()
        header = lines[0].split(",")
        cells = lines[row - 1].split(",")
        cells[header.index(column)] = f'"{value}"' if "," in value else value
        lines[row - 1] = ",".join(cells)
        (core / name).write_text("\n".join(lines) + "\n")
    return change


def toml(old: str, new: str):
    return _replace("core.toml", old, new)


def config(extra: str):
    def change(project: Path, core: Path) -> None:
        path = project / "run.toml"
        path.write_text(path.read_text() + "\n" + extra + "\n")
    return change


def raw(name: str, data: bytes):
    def change(project: Path, core: Path) -> None:
        (core / name).write_bytes(data)
    return change


def encode(name: str, encoding: str, bom: bytes = b""):
    def change(project: Path, core: Path) -> None:
        text = (core / name).read_text()
        (core / name).write_bytes(bom + text.encode(encoding))
    return change


def both(*changes):
    def change(project: Path, core: Path) -> None:
        for one in changes:
            one(project, core)
    return change


def as_format(suffix: str, writer: Callable[[pd.DataFrame, Path], None], role: str = "samples"):
    """Store the samples table in another format and name it in core.toml."""
    def change(project: Path, core: Path) -> None:
        frame = pd.read_csv(core / f"{role}.csv", dtype=str, keep_default_na=False)
        writer(frame, core / f"{role}{suffix}")
        (core / f"{role}.csv").unlink()
        text = (core / "core.toml").read_text().replace(f'{role} = "{role}.csv"', f'{role} = "{role}{suffix}"')
        (core / "core.toml").write_text(text)
    return change


def _numeric(frame: pd.DataFrame) -> pd.DataFrame:
    out = frame.copy()
    for column in out.columns:
        converted = pd.to_numeric(out[column].replace("", None), errors="coerce")
        if converted.notna().sum() == (out[column] != "").sum():
            out[column] = converted
    return out


def xlsx_writer(extra: Callable | None = None, title: str | None = None, hidden_stale: bool = False,
                active_empty: bool = False):
    def write(frame: pd.DataFrame, path: Path) -> None:
        import openpyxl

        book = openpyxl.Workbook()
        sheet = book.active
        sheet.title = "Data"
        if title:
            sheet.append([title])
            sheet.merge_cells("A1:F1")
        frame = _numeric(frame)
        sheet.append(list(frame.columns))
        for record in frame.itertuples(index=False):
            sheet.append([None if isinstance(v, float) and v != v else v for v in record])
        if extra:
            extra(sheet)
        if hidden_stale:
            stale = book.create_sheet("old", 0)
            stale.append(list(frame.columns))
            for record in frame.itertuples(index=False):
                stale.append([999 if isinstance(v, float) else v for v in record])
            stale.sheet_state = "hidden"
            book.active = 1
        if active_empty:
            empty = book.create_sheet("Notes", 0)
            empty["A3"] = None
            book.active = 0
        book.save(path)
    return write


def tsv(frame: pd.DataFrame, path: Path) -> None:
    frame.to_csv(path, sep="\t", index=False)


def txt_blanks(frame: pd.DataFrame, path: Path) -> None:
    frame = frame.drop(columns=["notes"]) if "notes" in frame else frame
    path.write_text(frame.replace("", "NA").to_string(index=False) + "\n")


def parquet(transform: Callable[[pd.DataFrame], pd.DataFrame]):
    def write(frame: pd.DataFrame, path: Path) -> None:
        transform(_numeric(frame)).to_parquet(path)
    return write


def _decimals(frame: pd.DataFrame) -> pd.DataFrame:
    frame = frame.reset_index(drop=True)
    frame["uk37"] = [decimal.Decimal(str(v)) for v in frame["uk37"]]
    return frame


def _lists(frame: pd.DataFrame) -> pd.DataFrame:
    frame = frame.reset_index(drop=True)
    frame["spectrum"] = [[1.0, 2.0]] * len(frame)
    return frame


def _records(frame: pd.DataFrame) -> pd.DataFrame:
    frame = frame.reset_index(drop=True)
    frame["meta"] = [{"a": 1, "b": "x"}] * len(frame)
    return frame


def link(name: str, target: str):
    def change(project: Path, core: Path) -> None:
        outside = project / "elsewhere.csv"
        shutil.copy(core / name, outside)
        (core / name).unlink()
        os.symlink(outside if target == "outside" else core / target, core / name)
    return change


def link_inside(project: Path, core: Path) -> None:
    os.replace(core / "samples.csv", core / "real_samples.csv")
    os.symlink("real_samples.csv", core / "samples.csv")


def folder_for_file(project: Path, core: Path) -> None:
    (core / "samples.csv").unlink()
    (core / "samples.csv").mkdir()
    (core / "samples.csv" / "README.txt").write_text("a folder, not the table")


def second_core_with_id(core_id: str):
    def change(project: Path, core: Path) -> None:
        other = shutil.copytree(core, project / "cores" / "OTHER")
        (other / "core.toml").write_text((other / "core.toml").read_text().replace('"GOOD-1"', f'"{core_id}"'))
    return change


def curve_file(text: str):
    def change(project: Path, core: Path) -> None:
        (project / "curves" / "atm.14c").write_text(text)
    return change


def _first(column: str, value: float):
    return lambda core: abs(float(core.samples[column].iloc[0]) - value) < 1e-9


S, D = "samples.csv", "dates.csv"
NUMBER_CELLS = [  # (cell text, words of the message)
    ("107_5", "underscore"), ("0_452", "underscore"), ("7,041", "ambiguous"), ("1,234,567", "ambiguous"),
    ("0,452", "decimal comma"), ("1.234,5", "decimal comma"), ("1 234", "blanks inside"),
    ("inf", "not a finite"), ("-Infinity", "not a finite"), ("1e999", "too large"), ("0x10", "not a number"),
    ("0.45.2", "not a number"), ("--1", "not a number"), ("1e", "not a number"), (".", "not a number"),
    ("+", "not a number"), ("abc", "not a number"), ("0.452%", "not a number"), ("~0.45", "not a number"),
    ("½", "not a number"), ("TRUE", "not a number"), ("0.45 0.46", "blanks inside"), ("1e5e3", "not a number"),
]
VALID_CELLS = [("0.452 ", 0.452), (" +0.452", 0.452), ("4.52e-1", 0.452), ("4.52E-01", 0.452), (".452", 0.452),
               ("452e-3", 0.452)]

CASES: list[Case] = []
CASES += [Case(f"proxy cell {text!r}", cell(S, 2, "uk37", text), S, 2, "uk37", words)
          for text, words in NUMBER_CELLS]
CASES += [Case(f"valid proxy cell {text!r}", cell(S, 2, "uk37", text), accept=_first("uk37", value))
          for text, value in VALID_CELLS]
CASES += [
    # numbers elsewhere
    Case("depth with a unit", cell(S, 3, "depth_cm", "12.5cm"), S, 3, "depth_cm", "not a number"),
    Case("depth with decimal comma", cell(S, 3, "depth_cm", "12,5"), S, 3, "depth_cm", "decimal comma"),
    Case("negative depth", cell(S, 3, "depth_cm", "-1"), S, 3, "depth_cm", "must be >= 0"),
    Case("date age with underscore", cell(D, 3, "age", "8_20"), D, 3, "age", "underscore"),
    Case("date age ambiguous thousands", cell(D, 4, "age", "1,850"), D, 4, "age", "ambiguous"),
    Case("reservoir offset ambiguous", cell(D, 3, "reservoir_offset", "4,000"), D, 3, "reservoir_offset",
         "ambiguous"),
    Case("zero age error", cell(D, 3, "error", "0"), D, 3, "error", "must be > 0"),
    Case("kind misspelt", cell(D, 3, "kind", "radiocarbn"), D, 3, "kind", "did you mean 'radiocarbon'"),
    Case("kind 14C", cell(D, 3, "kind", "14C"), D, 3, "kind", "unknown date kind"),
    Case("kind in capitals is fine", cell(D, 3, "kind", "Radiocarbon"), accept=lambda c: c.dates["kind"].iloc[1] == "radiocarbon"),
    Case("exclude maybe", cell(D, 3, "exclude", "maybe"), D, 3, "exclude", "true/false"),
    Case("calendar age 5e8", cell(D, 8, "age", "5e8"), D, 8, "age", "beyond"),
    Case("calendar age in the future", cell(D, 2, "age", "-500"), D, 2, "age", "younger than the core top"),
    Case("radiocarbon age beyond the curve", cell(D, 7, "age", "40000"), D, 7, "age", "outside curve"),
    Case("reservoir offset pushes beyond the curve", both(cell(D, 7, "age", "26900"),
                                                        cell(D, 7, "reservoir_offset", "-900")),
         D, 7, "age", "outside curve"),
    Case("radiocarbon age above the hard limit", cell(D, 7, "age", "60000"), D, 7, "age", "14C yr BP is outside"),
    Case("duplicate label", cell(D, 4, "label", "LX-1001"), D, 4, "label", "also on row 3"),
    Case("missing label", cell(D, 4, "label", ""), D, 4, "label", "label is missing"),
    Case("unknown section", cell(S, 3, "section", "C"), S, 3, "section", "unknown section"),
    Case("sample of A below the top of B", cell(S, 8, "depth_cm", "97.5"), S, 8, "depth_cm", "sections overlap"),
    Case("duplicate composite depth", cell(S, 3, "depth_cm", "2.5"), S, 3, "depth_cm", "also on row 2"),
    Case("negative count", cell("counts.csv", 2, "taxon_alpha", "-3"), "counts.csv", 2, "taxon_alpha", ">= 0"),
    Case("count with thousands separator", cell("counts.csv", 2, "taxon_alpha", "1,200"), "counts.csv", 2,
         "taxon_alpha", "ambiguous"),
    # headers
    Case("capitalised depth column", _replace(S, "depth_cm", "Depth_cm"), S, 1, "depth_cm", "rename it to 'depth_cm'"),
    Case("depth column with a blank", _replace(S, "depth_cm", "depth cm"), S, 1, "depth_cm", "rename it"),
    Case("misspelt reservoir_offset column", _replace(D, "reservoir_offset", "reservoir_ofset"), D, 1,
         "reservoir_ofset", "rename the column to 'reservoir_offset'"),
    Case("capitalised Exclude column", _replace(D, ",exclude", ",Exclude"), D, 1, "Exclude", "'exclude'"),
    Case("capitalised thickness column in samples", _replace(S, "thickness_cm", "Thickness_cm"), S, 1,
         "Thickness_cm", "rename the column to 'thickness_cm'"),
    Case("extra text column in dates is kept", lambda p, c: (c / D).write_text("\n".join(line + (",lab_note" if i == 0 else ",x")
                                                   for i, line in enumerate((c / D).read_text().splitlines())) + "\n"),
         accept=lambda c: "lab_note" in c.dates.columns),
    Case("missing error column", _replace(D, ",error,", ",err,"), D, 1, "error", "missing"),
    Case("duplicate column", _replace(S, "d18o_permil", "uk37"), S, 1, "uk37", "appears twice"),
    Case("empty column name", _replace(S, ",uk37_error,", ",,"), S, 1, None, "no name"),
    Case("trailing empty header cells", _replace(S, ",notes", ",notes,,"), accept=_first("uk37", 0.452)),
    Case("extra cell on a row", _replace(S, "A,12.5,1,0.447,0.010,-5.30,", "A,12.5,1,0.447,0.010,-5.30,,7"),
         S, 3, None, "cells but the header"),
    Case("semicolon separated", lambda p, c: (c / S).write_text((c / S).read_text().replace(",", ";")), S, 1, None,
         "semicolons"),
    Case("header only", raw(S, b"section,depth_cm,uk37\n"), S, None, None, "no data rows"),
    Case("empty samples file", raw(S, b""), S, None, None, "empty"),
    Case("only comment lines", raw(S, b"# lab: invented\n# operator: x\n"), S, None, None, "empty"),
    Case("error column without proxy", _replace(S, "uk37_error", "tex86_error"), S, 1, "tex86_error", "no proxy"),
    # text encodings and line endings
    Case("UTF-8 BOM in samples", encode(S, "utf-8", b"\xef\xbb\xbf"), accept=_first("uk37", 0.452)),
    Case("UTF-16 with BOM in samples", encode(S, "utf-16"), accept=_first("uk37", 0.452)),
    Case("UTF-16 without BOM", encode(S, "utf-16-le"), S, None, None, "UTF-16"),
    Case("Latin-1 note in samples", both(cell(S, 4, "notes", "smear slide é"), encode(S, "latin-1")), S, 4, None,
         "not UTF-8"),
    Case("Windows-1252 quote in dates", both(cell(D, 3, "label", "LX\u20181001"), encode(D, "cp1252")), D, 3, None,
         "Windows-1252"),
    Case("binary file as samples", raw(S, b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR"), S, None, None, "not a text file"),
    Case("CRLF line endings", lambda p, c: (c / S).write_bytes((c / S).read_bytes().replace(b"\n", b"\r\n")),
         accept=_first("uk37", 0.452)),
    Case("trailing blank lines", lambda p, c: (c / S).write_text((c / S).read_text() + "\n\n  \n"),
         accept=lambda c: len(c.samples) == 12),
    Case("comment lines before the header", lambda p, c: (c / S).write_text("# core GOOD-1\n# units: cm\n"
                                                                            + (c / S).read_text()),
         accept=lambda c: c.samples["source_row"].iloc[0] == 4),
    Case("BOM in core.toml", encode("core.toml", "utf-8", b"\xef\xbb\xbf"), accept=lambda c: c.id == "GOOD-1"),
    Case("UTF-16 core.toml with BOM", encode("core.toml", "utf-16"), accept=lambda c: c.id == "GOOD-1"),
    Case("Latin-1 comment in core.toml", both(toml("# A small", "# Café: a small"), encode("core.toml", "latin-1")),
         "core.toml", 1, None, "not UTF-8"),
    Case("Latin-1 comment in the run config",
         lambda p, c: (p / "run.toml").write_bytes(b"# caf\xe9\n" + (p / "run.toml").read_bytes()),
         "run.toml", 1, None, "not UTF-8"),
    Case("invalid TOML", toml('archive = "lake"', "archive = lake"), "core.toml", 4, None, "invalid TOML"),
    # other formats
    Case("tsv samples", as_format(".tsv", tsv), accept=_first("uk37", 0.452)),
    Case("txt tab samples", as_format(".txt", tsv), accept=_first("uk37", 0.452)),
    Case("txt blank-separated samples", as_format(".txt", txt_blanks), accept=_first("uk37", 0.452)),
    Case("unknown suffix", as_format(".dat", tsv), "samples.dat", None, None, "unknown table format"),
    Case("xlsx samples", as_format(".xlsx", xlsx_writer()), accept=_first("uk37", 0.452)),
    Case("xlsx stray space in the far corner", as_format(".xlsx", xlsx_writer(
        lambda ws: ws.cell(row=1048576, column=16384, value=" "))), accept=_first("uk37", 0.452)),
    Case("xlsx stray value far right", as_format(".xlsx", xlsx_writer(
        lambda ws: ws.cell(row=5, column=16000, value="x"))), "samples.xlsx", 5, None, "stray cell"),
    Case("xlsx formula without saved value", as_format(".xlsx", xlsx_writer(
        lambda ws: ws.cell(row=3, column=4, value="=D2*1.01"))), "samples.xlsx", 3, None, "formula"),
    Case("xlsx merged title row", as_format(".xlsx", xlsx_writer(title="Core GOOD-1 samples")),
         accept=lambda c: c.samples["source_row"].iloc[0] == 3),
    Case("xlsx hidden stale first sheet", as_format(".xlsx", xlsx_writer(hidden_stale=True)),
         accept=_first("uk37", 0.452)),
    Case("xlsx active sheet empty", as_format(".xlsx", xlsx_writer(active_empty=True)), "samples.xlsx", None, None,
         "sheet 'Notes'"),
    Case("xlsx named sheet", both(as_format(".xlsx", xlsx_writer(active_empty=True)),
                                  toml('samples = "samples.xlsx"', 'samples = { file = "samples.xlsx", sheet = "Data" }')),
         accept=_first("uk37", 0.452)),
    Case("xlsx misspelt sheet", both(as_format(".xlsx", xlsx_writer()),
                                     toml('samples = "samples.xlsx"', 'samples = { file = "samples.xlsx", sheet = "data" }')),
         "samples.xlsx", None, None, "did you mean 'Data'"),
    Case("sheet named for a csv", toml('samples = "samples.csv"', 'samples = { file = "samples.csv", sheet = "Data" }'),
         "core.toml", None, "files.samples.sheet", "not an .xlsx"),
    Case("broken xlsx", both(as_format(".xlsx", xlsx_writer()), raw("samples.xlsx", b"PK\x03\x04broken")),
         "samples.xlsx", None, None, "not a readable .xlsx"),
    Case("parquet samples", as_format(".parquet", parquet(lambda f: f.reset_index(drop=True))),
         accept=_first("uk37", 0.452)),
    Case("parquet depth as index", as_format(".parquet", parquet(lambda f: f.set_index("depth_cm"))),
         accept=lambda c: abs(c.samples["depth_cm"].iloc[0] - 2.5) < 1e-9),
    Case("parquet decimals", as_format(".parquet", parquet(_decimals)), accept=_first("uk37", 0.452)),
    Case("parquet list column", as_format(".parquet", parquet(_lists)), "samples.parquet", 1, "spectrum", "lists"),
    Case("parquet record column", as_format(".parquet", parquet(_records)), "samples.parquet", 1, "meta", "records"),
    Case("broken parquet", both(as_format(".parquet", parquet(lambda f: f)), raw("samples.parquet", b"PAR1xx")),
         "samples.parquet", None, None, "not a readable parquet"),
    # paths
    Case("symlink to a file outside", link(S, "outside"), S, None, None, "outside the core folder"),
    Case("symlink inside the folder", link_inside, accept=_first("uk37", 0.452)),
    Case("folder where the samples file belongs", folder_for_file, S, None, None, "is a folder"),
    Case("samples file missing", lambda p, c: (c / S).unlink(), S, None, None, "file not found"),
    Case("files.samples with ..", toml('samples = "samples.csv"', 'samples = "../samples.csv"'), "core.toml", None,
         "files.samples", "outside the core folder"),
    Case("files.samples absolute", toml('samples = "samples.csv"', 'samples = "/etc/passwd"'), "core.toml", None,
         "files.samples", "outside the core folder"),
    Case("files.samples drive letter", toml('samples = "samples.csv"', 'samples = "C:/data/s.csv"'), "core.toml",
         None, "files.samples", "outside the core folder"),
    # core.toml
    Case("id with final newline", toml('id = "GOOD-1"', 'id = "GOOD-1\\n"'), "core.toml", None, "core.id", "not safe"),
    Case("id with a blank", toml('id = "GOOD-1"', 'id = "GOOD 1"'), "core.toml", None, "core.id", "not safe"),
    Case("id with a slash", toml('id = "GOOD-1"', 'id = "GOOD/1"'), "core.toml", None, "core.id", "not safe"),
    Case("id empty", toml('id = "GOOD-1"', 'id = ""'), "core.toml", None, "core.id", "not safe"),
    Case("id starting with a dash", toml('id = "GOOD-1"', 'id = "-GOOD"'), "core.toml", None, "core.id", "not safe"),
    Case("id too long", toml('id = "GOOD-1"', f'id = "{"G" * 65}"'), "core.toml", None, "core.id", "not safe"),
    Case("id a Windows device name", toml('id = "GOOD-1"', 'id = "Con"'), "core.toml", None, "core.id", "Windows"),
    Case("id a run folder entry", toml('id = "GOOD-1"', 'id = "figures"'), "core.toml", None, "core.id",
         "run folder"),
    Case("two cores with one id", second_core_with_id("GOOD-1"), "core.toml", None, "core.id", "also used by"),
    Case("ids differing in case only", second_core_with_id("good-1"), "core.toml", None, "core.id", "upper/lower"),
    Case("id not text", toml('id = "GOOD-1"', "id = 12"), "core.toml", None, "core.id", "must be text"),
    Case("archive capitalised", toml('archive = "lake"', 'archive = "Lake"'), "core.toml", None, "core.archive",
         "unknown archive"),
    Case("misspelt key", toml("latitude = 61.25", "lattitude = 61.25"), "core.toml", None, "core.lattitude",
         "did you mean 'latitude'"),
    Case("latitude out of range", toml("latitude = 61.25", "latitude = 161.25"), "core.toml", None,
         "core.latitude", "outside"),
    Case("latitude as text", toml("latitude = 61.25", 'latitude = "61.25"'), "core.toml", None, "core.latitude",
         "must be a number"),
    Case("collected in the future", toml("collected = 2018", "collected = 2999"), "core.toml", None,
         "core.collected", "future"),
    Case("collected as BP", toml("collected = 2018", "collected = 68"), "core.toml", None, "core.collected", "before"),
    Case("unknown depth unit", toml('depth_unit = "cm"', 'depth_unit = "inch"'), "core.toml", None,
         "core.depth_unit", "unknown depth_unit"),
    Case("depth unit m with depth_cm columns", toml('depth_unit = "cm"', 'depth_unit = "m"'), S, 1, "depth_m",
         "depth_unit"),
    Case("top_age_error zero", toml("top_age_error = 5", "top_age_error = 0"), "core.toml", None,
         "core.top_age_error", "without any error"),
    Case("two sections with one top", toml("top = 95.0", "top = 0.0"), "core.toml", None, "sections[2].top",
         "like another section"),
    Case("inverted event layer", toml("bottom = 44.5", "bottom = 30.0"), "core.toml", None,
         "event_layers[1].bottom", "not below"),
    Case("event layer covering every sample", both(toml("top = 40.0\nbottom = 44.5", "top = 0.0\nbottom = 500.0"),
                                                   toml("depth = 150.0", "depth = 500.0")),
         "core.toml", None, "event_layers", "cover every sample"),
    Case("hiatus inside the event layer", toml("depth = 150.0", "depth = 42.0"), "core.toml", None,
         "hiatuses[1].depth", "inside the event layer"),
    Case("files table missing", toml("[files]", "[filez]"), "core.toml", None, "filez", "did you mean 'files'"),
    # what cannot be dated
    Case("every date excluded", lambda p, c: (c / D).write_text(
        (c / D).read_text().replace(",false\n", ",true\n").replace(",no\n", ",yes\n").replace(",0\n", ",1\n")
        .replace(",\n", ",yes\n")), D, None, "exclude", "every date is excluded"),
    Case("one date and no core top", both(
        lambda p, c: (c / D).write_text("\n".join((c / D).read_text().splitlines()[0:3:2]) + "\n"),
        config("[chronology]\ncore_top = false")), D, None, "depth_cm", "one date"),
    # run config
    Case("cores = []", _replace("run.toml", 'cores = ["cores/*"]', "cores = []"), "run.toml", None, "run.cores",
         "lists no core"),
    Case("cores pattern matching nothing", _replace("run.toml", 'cores = ["cores/*"]', 'cores = ["core/*"]'),
         "run.toml", None, "run.cores", "matches no folder"),
    Case("calibration naming no column", config('[calibration.uk73]\nmethod = "equation"\nequation = "uk37_mueller1998"'),
         "run.toml", None, "calibration.uk73", "did you mean 'uk37'"),
    Case("misspelt chronology key", config("[chronology]\nmodle = 'accumulation'"), "run.toml", None, "modle",
         "did you mean 'model'"),
    Case("tiny output step", config("[chronology]\noutput_step_cm = 1e-9"), "run.toml", None, "output_step_cm",
         "GiB"),
    Case("memory grid its prior gives no weight", config("[chronology]\nrate_memory = [0.0]"), "run.toml", None,
         "rate_memory", "gives no weight"),
    Case("tiny calibration step", config("[chronology]\ncalibration_step_yr = 1e-7"), "run.toml", None,
         "calibration_step_yr", "GiB"),
    Case("tiny accumulation grid step", config("[chronology]\ngrid_step_yr = 1e-6"), "run.toml", None,
         "grid_step_yr", "GiB"),
    Case("tiny reconstruction grid step", config("[reconstruction]\ngrid_step_yr = 1e-6"), "run.toml", None,
         "grid_step_yr", "GiB"),
    Case("two curves and an empty curve cell", both(
        _replace("run.toml", 'atmosphere = "curves/atm.14c"',
                                       'lake = "curves/atm.14c"\nsoil = "curves/atm.14c"'),
        _replace(D, ",atmosphere,", ",,")), D, 3, "curve", "empty curve cell"),
    Case("default curve not in [curves]", both(config('[chronology]\ndefault_curve = "marine"'),
                                              _replace(D, ",atmosphere,", ",,")), D, 3, "curve",
         "unknown curve 'marine'"),
    Case("curve cell misspelt", cell(D, 3, "curve", "atmosphre"), D, 3, "curve", "did you mean 'atmosphere'"),
    Case("curve file missing", lambda p, c: (p / "curves" / "atm.14c").unlink(), "run.toml", None,
         "curves.atmosphere", "not found"),
    Case("curve file with one line", curve_file("0, 50, 10, 0, 1\n"), "atm.14c", None, "curves.atmosphere",
         "data lines"),
    Case("curve file not numbers", curve_file("cal,c14\nx,y\n" * 5), "atm.14c", None, None, "curve"),
    Case("bad seed and a bad table together", both(_replace("run.toml", "seed = 5", "seed = -5"),
                                                   cell(S, 2, "uk37", "7,041")), S, 2, "uk37", "ambiguous"),
    Case("ensemble too small", _replace("run.toml", "ensemble = 50", "ensemble = 5"), "run.toml", None,
         "run.ensemble", "ensemble"),
    Case("training file missing", config('[training.midges]\nfile = "training/none.csv"\ntarget = "july_c"'),
         "none.csv", None, None, "file not found"),
    Case("misspelt training key", config('[training.midges]\nfile = "x.csv"\ntarget = "t"\ncomponnets = 3'),
         "run.toml", None, "componnets", "unknown key"),
    Case("instrumental file missing", config('[instrumental.station]\nfile = "none.csv"\nyear_column = "year"\n'
                                             'value_column = "t"'), "none.csv", None, None, "file not found"),
    Case("unknown run section", config("[chronolgy]\nmodel = 'accumulation'"), "run.toml", None, "chronolgy",
         "unknown section"),
]
