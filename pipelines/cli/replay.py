"""``downcore replay MANIFEST --out DIR``: re-run a recorded run and report, per output,
identical or different.

Exit status (README, "Runs, demo, replay and compare"): 0 every output identical (or within
the documented tolerance, or of the same content) and no input changed; 1 an output differs,
is missing or is new; 2 an input changed or is missing, the manifest cannot be read or
``--out`` is refused; 4 the replay could not be completed or an output could not be compared
(the error is named; this says nothing about reproducibility).
"""

from __future__ import annotations

import pathlib
import sys

import click

from pipelines.cli.run import exit_on_input_errors, executor_options, make_choice

EXIT_SAME, EXIT_DIFFERENT, EXIT_INPUT, EXIT_REPLAY_ERROR = 0, 1, 2, 4


@click.command(name="replay")
@click.argument("manifest", type=click.Path(exists=True, path_type=pathlib.Path))
@click.option("--out", "out", required=True, type=click.Path(path_type=pathlib.Path),
              help="New run folder for the replay (refused if it exists and is not empty).")
@click.option("--all", "show_all", is_flag=True, help="List every output, not only the differing ones.")
@executor_options
def command(manifest, out, show_all, workers, dask_address, dask_local, cache_dir, recompute, quiet) -> None:
    """Re-run the run recorded in MANIFEST (a manifest.json or its run folder) from scratch and
    compare every output with the recorded one."""
    from pipelines.manifest import read_manifest

    try:
        read_manifest(manifest)
    except (ValueError, OSError) as error:
        click.echo(f"downcore replay: {error}", err=True)
        sys.exit(EXIT_INPUT)
    from pipelines.flows.runners import apply_environment_defaults

    applied = apply_environment_defaults()
    if "PREFECT_LOGGING_LEVEL" in applied:
        from pipelines.cli.run import _silence_task_failures

        _silence_task_failures()
    from pipelines.flows.localserver import LocalServer

    server = LocalServer.start_if_needed()
    from pipelines.progress import RunProgress
    from pipelines.replay import replay_run
    from pipelines.runfolder import atomic_write_text

    del recompute  # a replay always recomputes (empty work store unless --cache-dir is given)
    try:
        with exit_on_input_errors("downcore replay"):
            report = replay_run(manifest, out, choice=make_choice(workers, dask_address, dask_local),
                                cache_dir=cache_dir, progress=RunProgress(quiet=quiet), local_server=server)
    except Exception as error:  # noqa: BLE001 - a failed replay is an error, never "different"
        click.echo(f"downcore replay: the replay failed ({type(error).__name__}: {error}); "
                   "nothing was compared", err=True)
        sys.exit(EXIT_REPLAY_ERROR)
    finally:
        if server is not None:
            server.stop()
    for change in report.input_changes:
        click.echo(f"INPUT {change}", err=True)
    if report.replay_dir is None:
        click.echo("downcore replay: the recorded run config is gone; nothing was re-run", err=True)
        sys.exit(EXIT_INPUT)
    table = report.table()
    atomic_write_text(report.replay_dir.parent / f"{report.replay_dir.name}-replay.csv", table.to_csv(index=False))
    counts = table["verdict"].value_counts().to_dict()
    shown = table if show_all else table[~table["verdict"].isin(["identical", "not compared"])]
    for row in shown.itertuples():
        click.echo(f"{row.verdict:>16}  {row.path}" + (f"  ({row.detail})" if row.detail else ""))
    for name, (was, now) in report.version_changes.items():
        click.echo(f"version of {name}: recorded {was}, now {now}")
    click.echo("replay: " + ", ".join(f"{n} {v}" for v, n in sorted(counts.items()))
               + f"; report {report.replay_dir.parent / (report.replay_dir.name + '-replay.csv')}")
    for row in report.errors:
        click.echo(f"downcore replay: {row.path}: {row.detail}", err=True)
    sys.exit(exit_status(report))


def exit_status(report) -> int:
    """The documented exit status of a replay report (see the module docstring)."""
    if report.input_changes:
        return EXIT_INPUT
    if report.errors:
        return EXIT_REPLAY_ERROR
    return EXIT_DIFFERENT if report.differences else EXIT_SAME
