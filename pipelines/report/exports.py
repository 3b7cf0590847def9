"""The standard exports of a run: CSV beside the Parquet tables and ``reconstructions.nc``."""

from __future__ import annotations

import pathlib

from pipelines.report.csv import write_csv_beside
from pipelines.report.netcdf import write_netcdf
from pipelines.report.rundata import read_run

__all__ = ["write_exports"]


def write_exports(run_dir: str | pathlib.Path, csv: bool = True,
                  unreadable: list[str] | None = None) -> list[pathlib.Path]:
    """Write the exports of a finished run folder.

    Parameters
    ----------
    run_dir : path-like
        The run folder.
    csv : bool
        Also write ``X.csv`` beside every ``X.parquet`` (default True).
    unreadable : list, optional
        Receives a sentence for every Parquet file that could not be read (no CSV copy).

    Returns
    -------
    list of pathlib.Path
        The files written: the CSV files (if any) and ``reconstructions.nc`` (when the run
        has reconstructions or a composite).
    """
    folder = pathlib.Path(run_dir)
    written = write_csv_beside(folder, unreadable) if csv else []
    nc = write_netcdf(read_run(folder))
    if nc is not None:
        written.append(nc)
    return written
