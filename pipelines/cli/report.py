"""``downcore report RUN_DIR``: regenerate the report and the exports of a finished run."""

from __future__ import annotations

import pathlib

import click

__all__ = ["command"]


def _refuse_a_live_run(run_dir: pathlib.Path) -> None:
    """Stop when a run is still writing ``run_dir`` (its lock is held): the report would be
    rewritten under it. A finished or killed run's folder passes."""
    from pipelines.runlock import LOCK_NAME, RunBusyError, acquire_run_lock, describe_owner, read_lock_record

    if not (run_dir / LOCK_NAME).is_file():
        return
    try:
        acquire_run_lock(run_dir).release(finished=False)
    except RunBusyError:
        raise click.ClickException(
            f"a run is still writing {run_dir} ({describe_owner(read_lock_record(run_dir))}) -- wait "
            "for it to finish, then run downcore report again; nothing was changed") from None


@click.command("report")
@click.argument("run_dir", type=click.Path(exists=True, file_okay=False, path_type=pathlib.Path))
@click.option("--no-csv", "no_csv", is_flag=True, default=False,
              help="Do not write CSV copies of the Parquet tables.")
@click.option("--png", "png", is_flag=True, default=False,
              help="Also write a PNG copy of every figure (each SVG figure drawn again as PNG).")
def command(run_dir: pathlib.Path, no_csv: bool, png: bool) -> None:
    """Write report.html, figures/ and the exports (CSV, reconstructions.nc) of RUN_DIR.

    Reads only the run folder, never the inputs; running it twice gives the same files.
    """
    from pipelines.report.build import write_report_with_exports

    if not (run_dir / "summary.parquet").is_file() and not (run_dir / "manifest.json").is_file():
        raise click.ClickException(f"{run_dir} holds no summary.parquet or manifest.json -- give "
                                   "the folder a downcore run wrote")
    _refuse_a_live_run(run_dir)
    unreadable: list[str] = []
    report, exports = write_report_with_exports(run_dir, png=png, csv=not no_csv, unreadable=unreadable)
    for sentence in unreadable:
        click.echo(f"warning: {sentence}", err=True)
    n_csv = sum(p.suffix == ".csv" for p in exports)
    nc = [p for p in exports if p.suffix == ".nc"]
    click.echo(f"report: {report}")
    click.echo(f"figures: {run_dir / 'figures'}")
    if n_csv:
        click.echo(f"CSV files: {n_csv}")
    click.echo(f"netCDF: {nc[0]}" if nc else "netCDF: none (the run has no reconstructions)")
