"""Figures drawn by two processes give the report of one process, byte for byte; a figure the
helper claimed but never delivered is still drawn."""

from __future__ import annotations

import concurrent.futures
import pathlib

from pipelines.report import build, drawing
from pipelines.report import write_run_report
from run_folder_factory import make_run_folder


def _report_bytes(run: pathlib.Path) -> dict[str, bytes]:
    files = sorted((run / "figures").glob("*.svg")) + [run / "report.html"]
    return {p.relative_to(run).as_posix(): p.read_bytes() for p in files}


def test_two_processes_draw_the_same_report_as_one(tmp_path):
    run = make_run_folder(tmp_path / "run")
    write_run_report(run, helpers=0)
    alone = _report_bytes(run)
    write_run_report(run, helpers=1)
    assert _report_bytes(run) == alone
    assert alone["report.html"].count(b'<figure class="plot"') == len(alone) - 1 > 5


class _DyingHelper:
    """A helper that claims some figures and dies before delivering them."""

    def submit(self, run_dir, png, claims, exports=False):
        for key in ("TARN-2_age_depth", "TARN-2_outliers", "stack_temperature"):
            claims.claim(key)
        future = concurrent.futures.Future()
        future.set_exception(RuntimeError("helper died"))
        return future


def test_helper_that_claims_and_fails_leaves_nothing_undrawn(tmp_path):
    run = make_run_folder(tmp_path / "run")
    write_run_report(run, helpers=0)
    alone = _report_bytes(run)
    write_run_report(run, helper=_DyingHelper())
    assert _report_bytes(run) == alone
    assert build.write_report_and_exports(run, helper=_DyingHelper()) == []  # exports written here then
    assert (run / "reconstructions.nc").is_file() and (run / "summary.csv").is_file()


def test_helper_writes_the_exports_while_this_process_draws(tmp_path):
    run = make_run_folder(tmp_path / "run")
    helper = drawing.ReportHelper()
    try:
        assert build.write_report_and_exports(run, helper=helper) == []
    finally:
        helper.close()
    assert (run / "reconstructions.nc").is_file() and (run / "TARN-2" / "chronology.csv").is_file()
    assert (run / "report.html").is_file()


def test_helpers_wanted_follows_the_environment_and_the_run_size(monkeypatch):
    monkeypatch.delenv(drawing.HELPERS_ENV, raising=False)
    assert drawing.helpers_wanted(1) == 0
    assert drawing.helpers_wanted(5, helpers=0) == 0
    monkeypatch.setenv(drawing.HELPERS_ENV, "0")
    assert drawing.helpers_wanted(50) == 0
    monkeypatch.setenv(drawing.HELPERS_ENV, "1")
    assert drawing.helpers_wanted(1) == 1


def test_claims_are_exclusive(tmp_path):
    claims = drawing.FigureClaims(str(tmp_path))
    assert claims.claim("a/b c") and not claims.claim("a/b c") and claims.claim("other")


def test_figures_drawn_while_the_science_runs_are_those_of_a_rewritten_report(tmp_path, prefect_harness):
    """A run's report (core figures drawn by the helper as each core is published, the rest at
    the end) has the bytes of the same report rewritten afterwards in one process."""
    from archive_factory import FULL_CHAIN, write_archive
    from pipelines.flows.run import execute_run
    from pipelines.flows.runners import ExecutorChoice

    config = write_archive(tmp_path, n_cores=3, ensemble=30, n_dates=4, n_samples=12, extra_config=FULL_CHAIN)
    outcome = execute_run(config, tmp_path / "run", cache_dir=tmp_path / "cache", report=True,
                          choice=ExecutorChoice(workers=2))
    assert not [n for n in outcome.notes if "not written" in n]
    figures = outcome.run_dir / "figures"
    in_run = {p.name: p.read_bytes() for p in sorted(figures.glob("*.svg"))}
    assert len(in_run) > 10
    write_run_report(outcome.run_dir, helpers=0)  # the run is finished: its manifest is final
    assert {p.name: p.read_bytes() for p in sorted(figures.glob("*.svg"))} == in_run


def test_helper_does_not_run_a_main_script_again(tmp_path):
    """multiprocessing's spawn would run a script without a ``__main__`` guard again in the
    helper (a second run); the helper is started with the main script hidden."""
    import os
    import subprocess
    import sys

    script = tmp_path / "unguarded.py"
    script.write_text("print('script body', flush=True)\n"
                      "from pipelines.report.drawing import ReportHelper\n"
                      "helper = ReportHelper()\n"
                      "print(helper.executor.submit(sum, [1, 2]).result(), flush=True)\n"
                      "helper.close()\n")
    root = pathlib.Path(__file__).resolve().parents[1]
    done = subprocess.run([sys.executable, str(script)], capture_output=True, text=True, timeout=120,
                          env={**os.environ, "PYTHONPATH": str(root)})
    assert done.returncode == 0, done.stderr
    assert done.stdout.splitlines() == ["script body", "3"]


def test_a_dead_helper_changes_nothing_but_the_time(tmp_path):
    run = make_run_folder(tmp_path / "run")
    write_run_report(run, helpers=0)
    alone = _report_bytes(run)
    helper = drawing.ReportHelper()
    try:
        for process in list(helper.executor._processes.values()):
            process.kill()
            process.join()
        helper.draw_core(run, "TARN-2")  # refused quietly
        assert build.write_report_and_exports(run, helper=helper) == []
    finally:
        helper.close()
    assert _report_bytes(run) == alone


def _export_bytes(run: pathlib.Path) -> dict[str, bytes]:
    files = sorted(run.rglob("*.csv")) + [run / "reconstructions.nc"]
    return {p.relative_to(run).as_posix(): p.read_bytes() for p in files if p.name != "timings.csv"}


def test_forked_helper_writes_the_exports_and_the_same_report(tmp_path):
    """The report command's path: a helper forked after the run folder is read writes the
    exports, then draws; report, figures and exports have the bytes of one process alone.
    Run in a fresh process (this one may hold threads of earlier tests: no fork then)."""
    import os
    import subprocess
    import sys

    from pipelines.report import write_exports
    from pipelines.report.csv import parquet_tables

    run = make_run_folder(tmp_path / "run")
    write_run_report(run, helpers=0)
    write_exports(run)
    alone, exports_alone = _report_bytes(run), _export_bytes(run)
    for path in run.rglob("*.csv"):
        if path.name != "timings.csv":
            path.unlink()
    (run / "reconstructions.nc").unlink()
    code = ("import sys\n"
            "from pipelines.report import build, drawing\n"
            "forked = []\n"
            "original = drawing.ForkedHelper\n"
            "drawing.ForkedHelper = lambda r: forked.append(r) or original(r)\n"
            "unreadable = []\n"
            "report, written = build.write_report_with_exports(sys.argv[1], unreadable=unreadable)\n"
            "print(len(forked), len(unreadable))\n"
            "print('\\n'.join(sorted(str(p) for p in written)))\n")
    root = pathlib.Path(__file__).resolve().parents[1]
    done = subprocess.run([sys.executable, "-c", code, str(run)], capture_output=True, text=True, timeout=300,
                          env={**os.environ, "PYTHONPATH": str(root), drawing.HELPERS_ENV: "1"})
    assert done.returncode == 0, done.stderr
    lines = done.stdout.splitlines()
    assert lines[0] == "1 0"  # forked once, every table readable
    assert _report_bytes(run) == alone and _export_bytes(run) == exports_alone
    assert lines[1:] == sorted(str(p) for p in {p.with_suffix(".csv") for p in parquet_tables(run)}
                               | {run / "reconstructions.nc"})
