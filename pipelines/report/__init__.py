"""The run report (HTML and figures) and the standard exports (CSV, CF netCDF).

Entry points:

* :func:`write_run_report` -- ``report.html`` and ``figures/*.svg`` (PNG copies on request) of a run folder;
* :func:`write_exports` -- CSV beside every Parquet table and ``reconstructions.nc``.

Both read only the run folder, so they can be re-run on any finished run
(``downcore report RUN``).
"""

from __future__ import annotations

__all__ = ["write_run_report", "write_exports", "write_report_and_exports"]


def write_run_report(run_dir, png: bool = False, helpers: int | None = None, helper=None):
    """See :func:`pipelines.report.build.write_run_report`."""
    from pipelines.report.build import write_run_report as _write

    return _write(run_dir, png=png, helpers=helpers, helper=helper)


def write_report_and_exports(run_dir, helper=None) -> list[str]:
    """See :func:`pipelines.report.build.write_report_and_exports`."""
    from pipelines.report.build import write_report_and_exports as _write

    return _write(run_dir, helper=helper)


def write_exports(run_dir, csv: bool = True, unreadable: list | None = None):
    """See :func:`pipelines.report.exports.write_exports`."""
    from pipelines.report.exports import write_exports as _write

    return _write(run_dir, csv=csv, unreadable=unreadable)
