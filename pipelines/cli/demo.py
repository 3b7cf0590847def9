"""``downcore demo [--out DIR]``: run the invented demo archive offline and say where the
results are."""

from __future__ import annotations

import datetime as _dt
import pathlib
import sys

import click

from pipelines.cli.run import EXIT_CORES_FAILED, EXIT_OK, execute, executor_options


def demo_config() -> pathlib.Path:
    """``demo_cores/run.toml`` of the source tree (next to the packages)."""
    import pipelines

    return pathlib.Path(pipelines.__file__).resolve().parents[1] / "demo_cores" / "run.toml"


@click.command(name="demo")
@click.option("--out", "out", type=click.Path(path_type=pathlib.Path), default=None,
              help="New run folder (default: ./downcore-demo-<UTC time>).")
@executor_options
def command(out, workers, dask_address, dask_local, cache_dir, recompute, quiet) -> None:
    """Run the demo cores (demo_cores/run.toml) offline and print where the results are."""
    config = demo_config()
    if not config.is_file():
        click.echo(f"downcore: the demo config {config} is missing (is downcore installed from "
                   "its source tree with 'pip install -e'?)", err=True)
        sys.exit(2)
    if out is None:
        out = pathlib.Path.cwd() / f"downcore-demo-{_dt.datetime.now(_dt.timezone.utc):%Y%m%dT%H%M%SZ}"
    outcome = execute(config, out, workers=workers, dask_address=dask_address, dask_local=dask_local,
                      cache_dir=cache_dir, recompute=recompute, quiet=quiet)
    click.echo(f"demo results: {outcome.run_dir}")
    report = outcome.run_dir / "report.html"
    if report.is_file():
        click.echo(f"open the report: {report}")
    sys.exit(EXIT_CORES_FAILED if outcome.failed else EXIT_OK)
