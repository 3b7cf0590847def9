"""Read a finished run folder for the report and the exports.

The report must open whatever a run left behind: a core that stopped after its chronology,
a failed core with nothing but its summary row. The tables and their columns are those that
:mod:`pipelines.outputs_schema` declares (no name is guessed); a table that is missing,
unreadable or lacks a required column is recorded in :attr:`CoreData.notes` and treated as
absent, so the figure that needs it is left out with a sentence saying why.
"""

from __future__ import annotations

import json
import math
import pathlib
import re
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
import pyarrow.parquet as pq

from pipelines.outputs_schema import CORE_TABLES, TABLES, member_columns
from pipelines.runfolder import IN_PROGRESS_MARKER

__all__ = [
    "read_core",
    "REQUIRED_COLUMNS",
    "CHECKED_NOT_READ",
    "CoreData",
    "RunData",
    "TrainingData",
    "read_run",
    "quantile_columns",
    "member_columns",
    "Series",
    "units_of",
    "reconstruction_series",
    "downcore_version",
]

#: columns each per-core table must hold for the report to use it (from the run-folder schema)
REQUIRED_COLUMNS: dict[str, tuple[str, ...]] = {key: TABLES[key].required for key in CORE_TABLES}

#: per-core tables neither the report nor the netCDF export draws on (the members of the
#: reconstruction, the largest table of a run): checked, not read
CHECKED_NOT_READ = frozenset({"reconstruction_ensemble"})

#: folders inside a run folder that are not cores
NOT_CORE_FOLDERS = {"training", "figures"}

_QUANTILE = re.compile(r"^q(\d{3})$")


@dataclass
class TrainingData:
    """A training set's cross-validation table and skill table (either may be None)."""

    name: str
    cv: pd.DataFrame | None
    skill: pd.DataFrame | None


@dataclass
class CoreData:
    """Everything the run folder holds about one core; absent tables are ``None``."""

    core_id: str
    status: str = "unknown"
    stage: str = ""
    reason: str = ""
    warnings: list[str] = field(default_factory=list)
    seconds: float | None = None
    tables: dict[str, pd.DataFrame] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)

    def table(self, name: str) -> pd.DataFrame | None:
        """The table ``name`` (a key of :data:`REQUIRED_COLUMNS`) or ``None``."""
        return self.tables.get(name)

    @property
    def ok(self) -> bool:
        return self.status == "ok"

    def hpd_ranges(self, level: float = 0.954) -> list[list[tuple[float, float]]]:
        """Each date's HPD ranges ``[(young, old), ...]`` [cal BP] at ``level``, in the row
        order of ``dates.parquet`` (from ``date_ranges.parquet``; empty lists without it)."""
        dates, ranges = self.table("dates"), self.table("date_ranges")
        if dates is None:
            return []
        if ranges is None:
            return [[] for _ in range(len(dates))]
        rows = ranges[np.isclose(ranges["level"].to_numpy(float), level)]
        by_label: dict[str, list[tuple[float, float]]] = {}
        for label, young, old in zip(rows["label"], rows["young_cal_bp"], rows["old_cal_bp"]):
            by_label.setdefault(str(label), []).append((float(young), float(old)))
        return [by_label.get(str(label), []) for label in dates["label"]]


@dataclass
class RunData:
    """A run folder as the report sees it."""

    folder: pathlib.Path
    manifest: dict[str, Any]
    summary: pd.DataFrame | None
    stack: pd.DataFrame | None
    cores: list[CoreData]
    training: list[TrainingData]
    notes: list[str] = field(default_factory=list)


def _read_parquet(path: pathlib.Path) -> pd.DataFrame:
    return pq.read_table(path).to_pandas()


def _load(path: pathlib.Path, required: tuple[str, ...], notes: list[str]) -> pd.DataFrame | None:
    """Read one table; ``None`` (with a note) when absent, unreadable or incomplete."""
    if not path.is_file():
        return None
    try:
        table = _read_parquet(path)
    except Exception as error:  # noqa: BLE001 - any unreadable file is reported, not raised
        notes.append(f"{path.name} could not be read ({type(error).__name__}: {error}); left out")
        return None
    missing = [c for c in required if c not in table.columns]
    if missing:
        notes.append(f"{path.name} lacks column(s) {', '.join(missing)}; left out")
        return None
    return table


def _text(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, float) and math.isnan(value):
        return ""
    return str(value)


def _warning_list(value: Any) -> list[str]:
    """The warnings of a summary row (``warnings`` is text, separated by ``' | '``)."""
    return [part.strip() for part in _text(value).split(" | ") if part.strip()]


def _core_from_summary(row: pd.Series) -> CoreData:
    """A core as ``summary.parquet`` (see :mod:`pipelines.outputs_schema`) lists it."""
    return CoreData(core_id=str(row["core_id"]), status=_text(row["status"]) or "unknown",
                    stage=_text(row["stage_reached"]), reason=_text(row["error"]),
                    warnings=_warning_list(row["warnings"]))


def _core_seconds(path: pathlib.Path) -> dict[str, float]:
    """Seconds spent per core, summed over its stages, from the run's ``timings.csv``.

    Timings live outside ``summary.parquet`` so that the summary stays byte-identical
    between runs; a missing or unreadable file gives no timings.
    """
    if not path.is_file():
        return {}
    try:
        timings = pd.read_csv(path)
        return {str(k): float(v) for k, v in timings.groupby("core_id")["seconds"].sum().items()}
    except (OSError, ValueError, KeyError, pd.errors.ParserError):
        return {}


def _read_manifest(folder: pathlib.Path, notes: list[str]) -> dict[str, Any]:
    """The run's manifest, or -- while the run is still writing its report -- the
    provisional manifest the run keeps in its in-progress marker (same fields; the final
    manifest adds the hashes of the report itself)."""
    path = folder / "manifest.json"
    if not path.is_file():
        marker = folder / IN_PROGRESS_MARKER
        if not marker.exists():
            notes.append("manifest.json is missing (an unfinished run?)")
            return {}
        path = marker
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except ValueError as error:
        if path.name == "manifest.json":
            notes.append(f"manifest.json is not valid JSON ({error})")
        return {}
    return data if isinstance(data, dict) else {}


def _read_training(folder: pathlib.Path, notes: list[str]) -> list[TrainingData]:
    training_dir = folder / "training"
    if not training_dir.is_dir():
        return []
    names = sorted({p.name[: -len("_cv.parquet")] for p in training_dir.glob("*_cv.parquet")}
                   | {p.name[: -len("_skill.parquet")]
                      for p in training_dir.glob("*_skill.parquet")})
    return [TrainingData(name,
                         _load(training_dir / f"{name}_cv.parquet", TABLES["training_cv"].required, notes),
                         _load(training_dir / f"{name}_skill.parquet", TABLES["training_skill"].required, notes))
            for name in names]


def _check_only(path: pathlib.Path, required: tuple[str, ...], notes: list[str]) -> None:
    """Check a table nobody here reads (its schema: readable, required columns present) and
    note what is wrong, as :func:`_load` would, without reading its data."""
    if not path.is_file():
        return
    try:
        names = pq.read_schema(path).names
    except Exception as error:  # noqa: BLE001 - any unreadable file is reported, not raised
        notes.append(f"{path.name} could not be read ({type(error).__name__}: {error}); left out")
        return
    missing = [c for c in required if c not in names]
    if missing:
        notes.append(f"{path.name} lacks column(s) {', '.join(missing)}; left out")


def _load_core_tables(core: CoreData, core_dir: pathlib.Path) -> None:
    for name, required in REQUIRED_COLUMNS.items():
        if name in CHECKED_NOT_READ:
            _check_only(core_dir / f"{name}.parquet", required, core.notes)
            continue
        table = _load(core_dir / f"{name}.parquet", required, core.notes)
        if table is not None:
            core.tables[name] = table


def read_core(run_dir: str | pathlib.Path, core_id: str) -> CoreData:
    """The tables of one core folder of a run (even one still in progress); the summary's
    facts (status, warnings) are not read: ``status`` is ``"unknown"``."""
    core = CoreData(core_id=core_id, status="unknown")
    _load_core_tables(core, pathlib.Path(run_dir) / core_id)
    return core


def read_run(run_dir: str | pathlib.Path) -> RunData:
    """Read a run folder.

    Parameters
    ----------
    run_dir : path-like
        The run folder (the one holding ``manifest.json``).

    Returns
    -------
    RunData
        Cores in the order of ``summary.parquet``, then any further core folders by name.

    Raises
    ------
    FileNotFoundError
        When ``run_dir`` is not a folder.
    """
    folder = pathlib.Path(run_dir)
    if not folder.is_dir():
        raise FileNotFoundError(f"{folder}: not a run folder -- give the folder a run wrote "
                                "(it holds manifest.json and summary.parquet)")
    notes: list[str] = []
    manifest = _read_manifest(folder, notes)
    summary = _load(folder / TABLES["summary"].path, TABLES["summary"].required, notes)
    stack = _load(folder / TABLES["stack"].path, TABLES["stack"].required, notes)
    cores: dict[str, CoreData] = {}
    if summary is not None:
        for _, row in summary.iterrows():
            core = _core_from_summary(row)
            cores.setdefault(core.core_id, core)
    for core_id, seconds in _core_seconds(folder / "timings.csv").items():
        if core_id in cores and cores[core_id].seconds is None:
            cores[core_id].seconds = seconds
    for sub in sorted(p for p in folder.iterdir() if p.is_dir()):
        if sub.name in NOT_CORE_FOLDERS or sub.name.startswith("."):
            continue
        if any(sub.glob("*.parquet")) and sub.name not in cores:
            cores[sub.name] = CoreData(core_id=sub.name, status="unknown",
                                       reason="not listed in summary.parquet")
    for core in cores.values():
        _load_core_tables(core, folder / core.core_id)
    return RunData(folder=folder, manifest=manifest, summary=summary, stack=stack,
                   cores=list(cores.values()), training=_read_training(folder, notes),
                   notes=notes)


def quantile_columns(table: pd.DataFrame, prefix: str) -> dict[float, str]:
    """Quantile columns ``<prefix>_median`` and ``<prefix>_qNNN`` (per mille) by probability.

    >>> quantile_columns(pd.DataFrame(columns=["value_q025", "value_median"]), "value")
    {0.025: 'value_q025', 0.5: 'value_median'}
    """
    found: dict[float, str] = {}
    for column in table.columns:
        name = str(column)
        if not name.startswith(prefix + "_"):
            continue
        suffix = name[len(prefix) + 1:]
        if suffix == "median":
            found[0.5] = name
            continue
        match = _QUANTILE.match(suffix)
        if match:
            found[int(match.group(1)) / 1000.0] = name
    return dict(sorted(found.items()))


@dataclass(frozen=True)
class Series:
    """One reconstructed series of a core: rows of ``reconstruction.parquet`` for one
    (variable, proxy), sorted by age."""

    variable: str
    proxy: str | None
    units: str
    rows: pd.DataFrame

    @property
    def label(self) -> str:
        return self.variable if not self.proxy else f"{self.variable} from {self.proxy}"

    @property
    def reference_window(self) -> tuple[float, float] | None:
        cols = ("reference_young_cal_bp", "reference_old_cal_bp")
        if not all(c in self.rows.columns for c in cols):
            return None
        young = pd.to_numeric(self.rows[cols[0]], errors="coerce").dropna()
        old = pd.to_numeric(self.rows[cols[1]], errors="coerce").dropna()
        if young.empty or old.empty:
            return None
        return float(young.iloc[0]), float(old.iloc[0])


def units_of(table: pd.DataFrame | None) -> str:
    """The first non-empty ``units`` cell of a table, or ``""``."""
    if table is None or "units" not in table.columns:
        return ""
    for value in table["units"].tolist():
        if _text(value).strip():
            return str(value).strip()
    return ""


def reconstruction_series(table: pd.DataFrame | None) -> list[Series]:
    """Split ``reconstruction.parquet`` into its series, in first-appearance order.

    A series is one ``variable`` (and one ``proxy`` when that column exists, since two
    proxies may reconstruct the same variable).
    """
    if table is None or not len(table):
        return []
    keys = ["variable"] + (["proxy"] if "proxy" in table.columns else [])
    out = []
    for key, rows in table.groupby(keys, sort=False, dropna=False):
        key = key if isinstance(key, tuple) else (key,)
        proxy = _text(key[1]) if len(key) > 1 else ""
        rows = rows.sort_values("age_cal_bp", kind="stable").reset_index(drop=True)
        out.append(Series(str(key[0]), proxy or None, units_of(rows), rows))
    return out


def downcore_version() -> str:
    """The installed downcore version (``""`` when it is not installed)."""
    import importlib.metadata

    try:
        return importlib.metadata.version("downcore")
    except importlib.metadata.PackageNotFoundError:
        return ""
