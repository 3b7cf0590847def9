"""Replay a recorded run and say, per output, whether the new run reproduced it.

The replay re-runs the recorded run config into a new folder with an empty work store (so
every stage is really recomputed, not copied from the cache) and compares every recorded
output with the new one:

``identical``
    Same bytes (same SHA-256). Expected for every table and export on the same platform with
    the same library versions.
``within tolerance``
    Parquet tables with the same columns, types and non-numeric values whose numeric values
    differ by no more than ``atol + rtol * |recorded|`` (defaults ``rtol = 1e-9``,
    ``atol = 1e-9``; NaN equals NaN). This is what can happen across platforms or BLAS/numpy
    versions (last-bit rounding), and it is reported, not hidden.
``different``, ``missing``, ``new``
    A real difference; the new run lacks the output; the new run has an output the record
    lacks.
``same content``
    netCDF exports whose variables, coordinates and values are equal (xarray ``equals``) but
    whose bytes differ (their global attributes name the run folder).
``not compared``
    Logs, timings and report files (they hold clock times).
``error``
    The comparison itself failed (an unreadable file, a bug): the detail names the error.
    This is no verdict on reproducibility, and the command says so with its own exit status.

Inputs are checked first: a changed or missing input file is reported and makes the replay
fail even when the outputs agree.
"""

from __future__ import annotations

import os
import pathlib
import shutil
import tempfile
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from pipelines.manifest import InputChange, check_inputs, read_manifest
from pipelines.runfolder import ensure_writable_folder, read_parquet

__all__ = ["OutputVerdict", "ReplayReport", "compare_outputs", "compare_tables", "replay_run"]

COMPARED_KINDS = ("table", "export", "record")
RTOL, ATOL = 1e-9, 1e-9


@dataclass(frozen=True)
class OutputVerdict:
    """The verdict for one output file."""

    path: str
    kind: str
    verdict: str
    detail: str = ""


@dataclass
class ReplayReport:
    """Everything a replay found."""

    recorded_dir: pathlib.Path
    replay_dir: pathlib.Path | None
    verdicts: list[OutputVerdict] = field(default_factory=list)
    input_changes: list[InputChange] = field(default_factory=list)
    version_changes: dict[str, tuple[str, str]] = field(default_factory=dict)

    @property
    def ok(self) -> bool:
        """No input changed, every output compared, none differs."""
        return not self.input_changes and not self.errors and not self.differences

    @property
    def differences(self) -> list[OutputVerdict]:
        return [v for v in self.verdicts if v.verdict in ("different", "missing", "new")]

    @property
    def errors(self) -> list[OutputVerdict]:
        return [v for v in self.verdicts if v.verdict == "error"]

    def table(self) -> pd.DataFrame:
        return pd.DataFrame([v.__dict__ for v in self.verdicts], columns=["path", "kind", "verdict", "detail"])


def compare_tables(recorded: pd.DataFrame, new: pd.DataFrame, rtol: float = RTOL,
                   atol: float = ATOL) -> tuple[bool, str]:
    """Whether two tables agree within tolerance; ``(agree, explanation)``."""
    if list(recorded.columns) != list(new.columns):
        return False, f"columns differ: {list(recorded.columns)} vs {list(new.columns)}"
    if recorded.shape != new.shape:
        return False, f"shape differs: {recorded.shape} vs {new.shape}"
    worst, where = 0.0, ""
    for column in recorded.columns:
        a, b = recorded[column], new[column]
        if pd.api.types.is_numeric_dtype(a) and pd.api.types.is_numeric_dtype(b) \
                and not pd.api.types.is_bool_dtype(a):
            x, y = a.to_numpy(dtype=float), b.to_numpy(dtype=float)
            if not np.array_equal(np.isnan(x), np.isnan(y)):
                return False, f"column {column}: missing values differ"
            finite = ~np.isnan(x)
            excess = np.abs(x[finite] - y[finite]) - (atol + rtol * np.abs(x[finite]))
            if excess.size and excess.max() > 0:
                k = int(np.argmax(excess))
                return False, (f"column {column}: {float(x[finite][k])!r} vs {float(y[finite][k])!r} "
                               f"(beyond rtol={rtol:g}, atol={atol:g})")
            diff = float(np.max(np.abs(x[finite] - y[finite]))) if finite.any() else 0.0
            if diff > worst:
                worst, where = diff, column
        elif not a.astype(str).equals(b.astype(str)):
            return False, f"column {column}: values differ"
    return True, f"largest difference {worst:.3g} in column {where}" if where else "same values"


def _verdict(path: str, kind: str, recorded_sha: str, new: dict[str, Any], recorded_root: pathlib.Path,
             new_root: pathlib.Path, rtol: float, atol: float) -> OutputVerdict:
    if kind not in COMPARED_KINDS:
        return OutputVerdict(path, kind, "not compared", "holds clock times")
    if path not in new:
        return OutputVerdict(path, kind, "missing", "the replay did not write it")
    if new[path]["sha256"] == recorded_sha:
        return OutputVerdict(path, kind, "identical")
    if kind == "table" and (recorded_root / path).is_file():
        agree, detail = compare_tables(read_parquet(recorded_root / path), read_parquet(new_root / path),
                                       rtol, atol)
        return OutputVerdict(path, kind, "within tolerance" if agree else "different", detail)
    if path.endswith(".nc") and (recorded_root / path).is_file():
        return _netcdf_verdict(path, kind, recorded_root / path, new_root / path)
    return OutputVerdict(path, kind, "different", "bytes differ")


def _netcdf_verdict(path: str, kind: str, recorded: pathlib.Path, new: pathlib.Path) -> OutputVerdict:
    """netCDF files carry the run folder's name in their global attributes (and HDF5 object
    headers), so their bytes differ between runs: compare their content instead (the stored
    numbers, time axes undecoded, so nothing depends on a calendar library)."""
    import xarray as xr

    with xr.open_dataset(recorded, decode_times=False) as a, xr.open_dataset(new, decode_times=False) as b:
        if not a.equals(b):
            return OutputVerdict(path, kind, "different", "variables, coordinates or values differ")
        changed = sorted(k for k in set(a.attrs) | set(b.attrs) if a.attrs.get(k) != b.attrs.get(k))
    detail = "same variables and values" + (f"; global attributes differ: {', '.join(changed)}" if changed else "")
    return OutputVerdict(path, kind, "same content", detail)


def _guarded_verdict(path: str, info: dict, new: dict, recorded_root: pathlib.Path, new_root: pathlib.Path,
                     rtol: float, atol: float) -> OutputVerdict:
    """:func:`_verdict`, with a failure of the comparison reported as verdict ``error``."""
    try:
        return _verdict(path, info["kind"], info["sha256"], new, recorded_root, new_root, rtol, atol)
    except Exception as error:  # noqa: BLE001 - any failure to compare is reported, not a difference
        return OutputVerdict(path, info.get("kind", "?"), "error",
                             f"could not compare: {type(error).__name__}: {error}")


def compare_outputs(recorded: dict, recorded_root: pathlib.Path, new: dict, new_root: pathlib.Path,
                    rtol: float = RTOL, atol: float = ATOL) -> list[OutputVerdict]:
    """Verdicts for the outputs of two manifests (recorded first)."""
    verdicts = [_guarded_verdict(path, info, new, recorded_root, new_root, rtol, atol)
                for path, info in sorted(recorded.items())]
    verdicts += [OutputVerdict(path, info["kind"], "new", "not in the recorded run")
                 for path, info in sorted(new.items())
                 if path not in recorded and info["kind"] in COMPARED_KINDS]
    return verdicts


def _version_changes(recorded: dict, current: dict) -> dict[str, tuple[str, str]]:
    return {name: (recorded.get(name, "-"), current.get(name, "-"))
            for name in sorted(set(recorded) | set(current)) if recorded.get(name) != current.get(name)}


def replay_run(manifest_path: str | os.PathLike[str], out_dir: str | os.PathLike[str], *,
               choice: Any = None, cache_dir: str | os.PathLike[str] | None = None,
               progress: Any = None, rtol: float = RTOL, atol: float = ATOL,
               local_server: Any = None) -> ReplayReport:
    """Re-run the run recorded in ``manifest_path`` into ``out_dir`` and compare (see module
    docstring). ``cache_dir`` defaults to a new, empty work store that is removed afterwards."""
    from pipelines.flows.run import execute_run
    from pipelines.manifest import package_versions

    manifest_file = pathlib.Path(manifest_path)
    recorded = read_manifest(manifest_file)
    recorded_root = manifest_file.parent if manifest_file.is_file() else manifest_file
    report = ReplayReport(recorded_dir=recorded_root.resolve(), replay_dir=None,
                          input_changes=check_inputs(recorded))
    config = pathlib.Path(recorded["config"]["path"])
    if not config.is_file():
        return report
    temporary = None
    if cache_dir is None:
        parent = ensure_writable_folder(pathlib.Path(out_dir).expanduser().resolve().parent,
                                        "the folder of --out")
        temporary = pathlib.Path(tempfile.mkdtemp(prefix=".downcore-replay-cache-", dir=parent))
    try:
        outcome = execute_run(config, out_dir, choice=choice, cache_dir=cache_dir or temporary,
                              progress=progress, report=bool(recorded.get("options", {}).get("report", True)),
                              local_server=local_server)
    finally:
        if temporary is not None:
            shutil.rmtree(temporary, ignore_errors=True)
    report.replay_dir = outcome.run_dir
    new = read_manifest(outcome.run_dir)
    report.verdicts = compare_outputs(recorded["outputs"], recorded_root, new["outputs"], outcome.run_dir,
                                      rtol, atol)
    report.version_changes = _version_changes(recorded.get("versions", {}), package_versions())
    return report
