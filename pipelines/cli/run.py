"""``downcore run CONFIG --out DIR``: run the whole chain on the cores a run config lists.

Exit status: 0 every core finished; 3 the run is complete but some cores failed (see the
summary); 2 bad input (the config, or the output folder); 1 anything else.
"""

from __future__ import annotations

import contextlib
import os
import pathlib
import sys
from typing import Any, Callable, Iterator

import click

EXIT_OK, EXIT_ERROR, EXIT_INPUT, EXIT_CORES_FAILED = 0, 1, 2, 3


def executor_options(function: Callable) -> Callable:
    """Options shared by ``run``, ``demo`` and ``replay``: where tasks run, cache, progress."""
    options = [
        click.option("--workers", type=click.IntRange(min=1), default=None,
                     help="Tasks at once (threads, or local Dask workers). Default: CPU count."),
        click.option("--dask-address", metavar="tcp://HOST:PORT", default=None,
                     help="Run the tasks on an existing Dask cluster (its scheduler address)."),
        click.option("--dask-local", is_flag=True,
                     help="Start a local Dask cluster of --workers processes for this run."),
        click.option("--cache-dir", type=click.Path(file_okay=False, path_type=pathlib.Path),
                     default=None, help="Work store of finished stages (default: .downcore-cache "
                     "next to the run folder, or $DOWNCORE_CACHE_DIR)."),
        click.option("--recompute", is_flag=True, help="Recompute every stage, ignoring finished work."),
        click.option("--quiet", "-q", is_flag=True, help="No progress display and no summary table."),
    ]
    for option in reversed(options):
        function = option(function)
    return function


def make_choice(workers: int | None, dask_address: str | None, dask_local: bool):
    """The :class:`~pipelines.flows.runners.ExecutorChoice` for the command-line options."""
    from pipelines.flows.runners import ExecutorChoice

    if dask_address and dask_local:
        raise click.UsageError("give either --dask-address or --dask-local, not both")
    if dask_address and not dask_address.startswith(("tcp://", "tls://", "ucx://", "inproc://")):
        raise click.UsageError(f"--dask-address {dask_address!r}: expected tcp://HOST:PORT")
    return ExecutorChoice(workers=workers or (os.cpu_count() or 2), dask_address=dask_address,
                          dask_local=dask_local)


def print_summary(outcome: Any, quiet: bool) -> None:
    """The per-core table (status, stage reached, warnings, seconds) and where the results are;
    with ``quiet`` only one line on the error stream when cores failed."""
    if quiet:
        if outcome.failed:
            click.echo(f"downcore: {len(outcome.failed)} of {len(outcome.summary)} cores failed "
                       f"({', '.join(outcome.failed[:5])}{', ...' if len(outcome.failed) > 5 else ''}); "
                       f"see {outcome.run_dir / 'summary.parquet'}", err=True)
        return
    seconds = outcome.timings.groupby("core_id")["seconds"].sum() if len(outcome.timings) else {}
    rows = []
    for row in outcome.summary.to_dict("records"):
        first = row["error"].splitlines()[0] if row["error"] else ""
        rows.append((row["core_id"], row["status"], row["stage_reached"], str(row["n_warnings"]),
                     f"{float(seconds.get(row['core_id'], 0.0)):.1f}", first[:100]))
    from rich.console import Console
    from rich.table import Table

    table = Table(title=f"downcore run: {len(rows)} cores, {len(outcome.failed)} failed, "
                        f"{outcome.seconds:.1f} s")
    for header in ("core", "status", "stage reached", "warnings", "seconds", "error"):
        table.add_column(header)
    for row in rows:
        table.add_row(*row)
    console = Console(file=sys.stdout, width=max(100, Console().width))
    console.print(table)
    for note in outcome.notes:
        console.print(f"note: {note}", markup=False, highlight=False)
    console.print(f"results: {outcome.run_dir}", markup=False, highlight=False)


def _silence_task_failures() -> None:
    """A failed core is reported in the summary and its log.txt; Prefect's own traceback of
    the failed task would only repeat it on the terminal (set PREFECT_LOGGING_LEVEL to see
    Prefect's logs again). Prefect re-reads its logging config from the environment."""
    for logger in ("TASK_RUNS", "FLOW_RUNS"):
        os.environ.setdefault(f"PREFECT_LOGGING_LOGGERS_PREFECT_{logger}_LEVEL", "CRITICAL")


@contextlib.contextmanager
def exit_on_input_errors(prefix: str) -> Iterator[None]:
    """Bad input (config, cores) and a refused or unwritable folder: one message, exit 2."""
    from pipelines.runfolder import RunFolderError
    from proxies.problems import InputError

    try:
        yield
    except InputError as error:
        click.echo(f"{prefix}: the input has problems:\n{error}", err=True)
        sys.exit(EXIT_INPUT)
    except RunFolderError as error:
        click.echo(f"{prefix}: {error.strerror or error}", err=True)
        sys.exit(EXIT_INPUT)


def _start_helpers_early(report: bool) -> None:
    """When a report is coming on a machine of two or more CPUs (so a report helper, see
    :mod:`pipelines.report.drawing`), the helpers' fork server starts importing the science and
    the drawing now, while this process imports Prefect (:func:`pipelines.spawning.helper_context`)."""
    if report and (os.cpu_count() or 1) >= 2 and os.environ.get("DOWNCORE_REPORT_HELPERS", "").strip() != "0":
        from pipelines.spawning import helper_context

        helper_context()


def execute(config: pathlib.Path, out: pathlib.Path, *, workers, dask_address, dask_local,
            cache_dir, recompute, quiet, resume: bool = False, report: bool = True) -> Any:
    """Run and print; exit with the documented status on errors."""
    from pipelines.flows.runners import apply_environment_defaults

    applied = apply_environment_defaults()
    if "PREFECT_LOGGING_LEVEL" in applied:
        _silence_task_failures()
    choice = make_choice(workers, dask_address, dask_local)
    _start_helpers_early(report)
    from pipelines.flows.localserver import LocalServer

    server = LocalServer.start_if_needed()  # starts while the config is read and inputs hashed
    from pipelines.flows.run import execute_run
    from pipelines.progress import RunProgress

    try:
        with exit_on_input_errors("downcore"):
            outcome = execute_run(config, out, choice=choice, cache_dir=cache_dir, recompute=recompute,
                                  resume=resume, progress=RunProgress(quiet=quiet), report=report,
                                  local_server=server)
    finally:
        if server is not None:
            server.stop()
    print_summary(outcome, quiet)
    return outcome


@click.command(name="run")
@click.argument("config", type=click.Path(exists=True, dir_okay=False, path_type=pathlib.Path))
@click.option("--out", "out", required=True, type=click.Path(path_type=pathlib.Path),
              help="New run folder (created; refused if it exists and is not empty).")
@click.option("--resume", is_flag=True, help="Finish an unfinished run in --out, reusing finished work.")
@click.option("--no-report", is_flag=True, help="Skip the HTML report and the exports.")
@executor_options
def command(config, out, resume, no_report, workers, dask_address, dask_local, cache_dir,
            recompute, quiet) -> None:
    """Run the chain (ingest, chronology, calibration, reconstruction, events) on every core
    CONFIG lists and write everything into a new run folder --out."""
    outcome = execute(config, out, workers=workers, dask_address=dask_address, dask_local=dask_local,
                      cache_dir=cache_dir, recompute=recompute, quiet=quiet, resume=resume,
                      report=not no_report)
    sys.exit(EXIT_CORES_FAILED if outcome.failed else EXIT_OK)
