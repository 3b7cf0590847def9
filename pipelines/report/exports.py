"""The standard exports of a run: CSV beside the Parquet tables and ``reconstructions.nc``."""

from __future__ import annotations

import pathlib

from pipelines.report.csv import write_csv_beside
from pipelines.report.netcdf import write_netcdf
from pipelines.report.rundata import RunData, read_run

__all__ = ["write_exports", "netcdf_part", "with_netcdf"]


def write_exports(run_dir: str | pathlib.Path, csv: bool = True,
                  unreadable: list[str] | None = None, netcdf: bool = True) -> list[pathlib.Path]:
    """Write the exports of a finished run folder.

    Parameters
    ----------
    run_dir : path-like
        The run folder.
    csv : bool
        Also write ``X.csv`` beside every ``X.parquet`` (default True).
    unreadable : list, optional
        Receives a sentence for every Parquet file that could not be read (no CSV copy).
    netcdf : bool
        Write ``reconstructions.nc`` (default True; False when another process writes it).

    Returns
    -------
    list of pathlib.Path
        The files written: the CSV files (if any) and ``reconstructions.nc`` (when the run
        has reconstructions or a composite).
    """
    folder = pathlib.Path(run_dir)
    written = write_csv_beside(folder, unreadable) if csv else []
    nc = write_netcdf(read_run(folder)) if netcdf else None
    if nc is not None:
        written.append(nc)
    return written


def netcdf_part(run: RunData) -> dict:
    """``reconstructions.nc`` written by this process: ``{"exports": None or the failure's
    text, "written": [path, if any]}`` (as :func:`pipelines.report.drawing._exports_part`)."""
    try:
        path = write_netcdf(run)
    except Exception as error:  # noqa: BLE001 - reported by the caller (a note, or done again)
        return {"exports": f"{type(error).__name__}: {error}", "written": []}
    return {"exports": None, "written": [] if path is None else [str(path)]}


def with_netcdf(delivered: dict, netcdf: dict) -> dict:
    """The helper's exports and this process's netCDF as one answer (CSV files first)."""
    failed = delivered["exports"] or netcdf["exports"]
    written = None if failed else list(delivered["written"] or []) + netcdf["written"]
    return {**delivered, "exports": failed, "written": written}
