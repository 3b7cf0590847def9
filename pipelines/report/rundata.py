"""Read a finished run folder for the report and the exports, defensively.

The report must open whatever a run left behind: a core that stopped after its chronology,
a failed core with nothing but its summary row, a table written by a newer stage with extra
columns. Each table is checked only for the columns the run-folder contract requires
(DEVELOPERS.md, "The run folder"); a table that is missing, unreadable or lacks a required
column is recorded in :attr:`CoreData.notes` and treated as absent, so the figure that needs
it is left out with a sentence saying why.
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

from pipelines.runfolder import IN_PROGRESS_MARKER

__all__ = [
    "REQUIRED_COLUMNS",
    "CoreData",
    "RunData",
    "TrainingData",
    "read_run",
    "quantile_columns",
    "member_columns",
    "hpd_ranges_of",
    "median_column",
    "Series",
    "units_of",
    "reconstruction_series",
    "downcore_version",
]

#: columns each per-core table must hold for the report to use it (the run-folder contract)
REQUIRED_COLUMNS: dict[str, tuple[str, ...]] = {
    "chronology": ("depth_cm", "age_median", "age_q025", "age_q975"),
    "age_ensemble": ("depth_cm",),
    "dates": ("label", "depth_cm"),
    "date_densities": ("label", "age_cal_bp", "density"),
    "calibration": (),
    "calibrated_samples": ("depth_cm", "variable", "value_median"),
    "calibration_diagnostics": ("depth_cm",),
    "reconstruction": ("age_cal_bp", "variable", "value_median"),
    "reconstruction_ensemble": ("age_cal_bp", "variable"),
    "events": ("variable", "onset_median", "onset_q025", "onset_q975"),
    "event_probability": ("age_cal_bp", "variable", "probability"),
    # optional, not in the contract yet: per-member event onsets and date densities
    "event_onsets": ("event_id", "onset_cal_bp"),
}

#: run-level tables
STACK_COLUMNS = ("age_cal_bp", "variable", "value_median", "value_q025", "value_q975")
CV_COLUMNS = ("observed", "predicted")

#: folders inside a run folder that are not cores
NOT_CORE_FOLDERS = {"training", "figures"}

_MEMBER = re.compile(r"^m\d+$")
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
        return self.status.lower() in ("ok", "done", "success", "finished", "complete", "completed")


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
    """Normalise a summary ``warnings`` cell (list, array, JSON text, text or count)."""
    if value is None:
        return []
    if isinstance(value, (list, tuple, np.ndarray)):
        return [str(v) for v in value if _text(v)]
    if isinstance(value, (int, np.integer)):
        return [f"{int(value)} warning(s); see log.txt"] if value else []
    if isinstance(value, float):
        if math.isnan(value) or value == 0:
            return []
        return [f"{int(value)} warning(s); see log.txt"]
    text = str(value).strip()
    if not text:
        return []
    if text.startswith("["):
        try:
            return [str(v) for v in json.loads(text)]
        except ValueError:
            pass
    return [part.strip() for line in text.splitlines() for part in line.split(" | ")
            if part.strip()]


def _first_present(row: pd.Series, names: tuple[str, ...]) -> Any:
    for name in names:
        if name in row.index and _text(row[name]):
            return row[name]
    return None


def _core_from_summary(row: pd.Series) -> CoreData:
    seconds = _first_present(row, ("seconds", "duration_s", "elapsed_s"))
    try:
        seconds = float(seconds) if seconds is not None else None
    except (TypeError, ValueError):
        seconds = None
    return CoreData(
        core_id=str(row["core_id"]),
        status=_text(_first_present(row, ("status",))) or "unknown",
        stage=_text(_first_present(row, ("stage_reached", "stage", "last_stage"))),
        reason=_text(_first_present(row, ("reason", "error", "message", "failure"))),
        warnings=_warning_list(_first_present(row, ("warnings", "warning"))),
        seconds=seconds,
    )


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
                         _load(training_dir / f"{name}_cv.parquet", CV_COLUMNS, notes),
                         _load(training_dir / f"{name}_skill.parquet", (), notes))
            for name in names]


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
    summary = _load(folder / "summary.parquet", ("core_id",), notes)
    stack = _load(folder / "stack.parquet", STACK_COLUMNS, notes)
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
        core_dir = folder / core.core_id
        for name, required in REQUIRED_COLUMNS.items():
            table = _load(core_dir / f"{name}.parquet", required, core.notes)
            if table is not None:
                core.tables[name] = table
    return RunData(folder=folder, manifest=manifest, summary=summary, stack=stack,
                   cores=list(cores.values()), training=_read_training(folder, notes),
                   notes=notes)


def member_columns(table: pd.DataFrame) -> list[str]:
    """Ensemble member columns (``m0000``, ``m0001``, ...) in file order."""
    return [c for c in table.columns if _MEMBER.match(str(c))]


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


_MEDIAN_NAMES = ("cal_median_bp", "age_cal_median", "cal_bp_median", "calibrated_median",
                 "median_cal_bp", "cal_median", "age_median", "median")


def median_column(dates: pd.DataFrame) -> str | None:
    """The column of ``dates.parquet`` holding the calibrated median [cal BP], if any."""
    for name in _MEDIAN_NAMES:
        if name in dates.columns:
            return name
    for column in dates.columns:
        if "median" in str(column).lower():
            return str(column)
    return None


_NUMBER = r"-?\d+(?:\.\d+)?"
_RANGE = re.compile(rf"({_NUMBER})\s*(?:–|—|\.\.|to|,|-)\s*({_NUMBER})")


def _ranges_from_value(value: Any) -> list[tuple[float, float]]:
    if value is None:
        return []
    if isinstance(value, float) and math.isnan(value):
        return []
    if isinstance(value, (list, tuple, np.ndarray)):
        items = list(value)
        if items and all(isinstance(v, (int, float, np.number)) for v in items):
            return [(float(items[0]), float(items[1]))] if len(items) >= 2 else []
        out: list[tuple[float, float]] = []
        for item in items:
            if isinstance(item, dict):
                keys = [k for k in item if isinstance(item[k], (int, float, np.number))]
                if len(keys) >= 2:
                    out.append((float(item[keys[0]]), float(item[keys[1]])))
            else:
                out.extend(_ranges_from_value(item))
        return out
    text = str(value).strip()
    if text.startswith("["):
        try:
            return _ranges_from_value(json.loads(text))
        except ValueError:
            pass
    return [(float(a), float(b)) for a, b in _RANGE.findall(text)]


def hpd_ranges_of(dates: pd.DataFrame, level: str = "hpd95") -> list[list[tuple[float, float]]]:
    """The HPD ranges of each date as ``[(young, old), ...]`` [cal BP].

    Accepts what a chronology stage may write: one text/JSON/list column named with
    ``level`` (e.g. ``"4870-5120; 5150-5200"`` or ``[[4870, 5120, 0.91], ...]``), or a pair
    of numeric columns ``<level>_young``/``<level>_old`` (also ``_from/_to``, ``_min/_max``,
    ``_lo/_hi``). Returns empty lists when nothing is found.
    """
    n = len(dates)
    columns = [str(c) for c in dates.columns if level in str(c).lower()]
    for low, high in (("young", "old"), ("from", "to"), ("min", "max"), ("lo", "hi"),
                      ("start", "end"), ("q_low", "q_high")):
        lo = [c for c in columns if c.endswith("_" + low)]
        hi = [c for c in columns if c.endswith("_" + high)]
        if lo and hi:
            a = pd.to_numeric(dates[lo[0]], errors="coerce").to_numpy(float)
            b = pd.to_numeric(dates[hi[0]], errors="coerce").to_numpy(float)
            return [[(min(x, y), max(x, y))] if np.isfinite(x) and np.isfinite(y) else []
                    for x, y in zip(a, b)]
    for column in columns:
        if dates[column].dtype == object or pd.api.types.is_string_dtype(dates[column]):
            out = []
            for value in dates[column].tolist():
                out.append([(min(a, b), max(a, b)) for a, b in _ranges_from_value(value)])
            return out
    return [[] for _ in range(n)]


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
