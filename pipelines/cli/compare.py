"""``downcore compare RUN_A RUN_B``: how each core's chronology, reconstruction and events
moved from run A to run B, as a table on screen and a CSV file."""

from __future__ import annotations

import math
import pathlib
import sys

import click


def _cell(value) -> str:
    if isinstance(value, float):
        return "" if math.isnan(value) else f"{value:+.1f}" if abs(value) >= 0.05 or value == 0 else f"{value:+.3g}"
    import pandas as pd

    return "" if value is None or value is pd.NA else str(value)


@click.command(name="compare")
@click.argument("run_a", type=click.Path(exists=True, file_okay=False, path_type=pathlib.Path))
@click.argument("run_b", type=click.Path(exists=True, file_okay=False, path_type=pathlib.Path))
@click.option("--out", "out", type=click.Path(dir_okay=False, path_type=pathlib.Path), default=None,
              help="CSV file to write (default: ./compare_<A>_vs_<B>.csv).")
@click.option("--quiet", "-q", is_flag=True, help="Write the file only.")
def command(run_a, run_b, out, quiet) -> None:
    """Per core: median and largest age shift, change of the 95 % interval, change of the
    reconstructed values and shifts of event onsets from RUN_A to RUN_B."""
    from pipelines.compare import compare_runs
    from pipelines.runfolder import RunFolderError, atomic_write_text

    try:
        table = compare_runs(run_a, run_b)
    except FileNotFoundError as error:
        click.echo(f"downcore compare: {error}", err=True)
        sys.exit(2)
    out = out or pathlib.Path.cwd() / f"compare_{run_a.resolve().name}_vs_{run_b.resolve().name}.csv"
    try:
        atomic_write_text(out, table.to_csv(index=False))
    except RunFolderError as error:
        click.echo(f"downcore compare: {error.strerror or error}", err=True)
        sys.exit(2)
    if not quiet:
        from rich.console import Console
        from rich.table import Table

        shown = {"core_id": "core", "status_a": "A", "status_b": "B", "age_shift_median_yr": "age shift median [yr]",
                 "age_shift_max_abs_yr": "largest [yr]", "age_shift_max_depth_cm": "at [cm]",
                 "value_change_median": "value change median", "value_change_max_abs": "largest",
                 "events_a": "events A", "events_b": "events B", "onset_shift_median_yr": "onset shift [yr]"}
        view = Table(title=f"{run_a} -> {run_b}")
        for header in shown.values():
            view.add_column(header)
        for row in table.to_dict("records"):
            view.add_row(*(_cell(row[key]) for key in shown))
        console = Console(file=sys.stdout, width=max(120, Console().width))
        console.print(view)
        console.print(f"written: {out}", markup=False, highlight=False)
