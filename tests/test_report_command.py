"""``downcore report`` on run folders that are damaged or still being written."""

from __future__ import annotations

import fcntl
import json
import os
import socket

from click.testing import CliRunner

from pipelines.cli import main
from pipelines.runlock import LOCK_NAME
from run_folder_factory import make_run_folder


def test_an_unreadable_table_is_named_not_a_traceback(tmp_path):
    run = make_run_folder(tmp_path / "run")
    (run / "summary.parquet").write_bytes(b"\n")          # truncated by a full disk, say
    result = CliRunner().invoke(main, ["report", str(run)])
    assert result.exit_code == 0, result.output
    assert result.exception is None or isinstance(result.exception, SystemExit)
    assert "summary.parquet cannot be read as Parquet" in result.output
    assert (run / "report.html").is_file() and not (run / "summary.csv").exists()


def test_a_live_run_is_not_reported_under_its_feet(tmp_path):
    run = make_run_folder(tmp_path / "run")
    fd = os.open(run / LOCK_NAME, os.O_RDWR | os.O_CREAT)
    os.write(fd, json.dumps({"pid": os.getpid(), "host": socket.gethostname(), "state": "running"}).encode())
    fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)        # as a live run holds it
    try:
        before = sorted(p.name for p in run.iterdir())
        result = CliRunner().invoke(main, ["report", str(run)])
        assert result.exit_code == 1 and "a run is still writing" in result.output
        assert sorted(p.name for p in run.iterdir()) == before
    finally:
        os.close(fd)
    # the lock is released (the run died, its record left behind): the report may be written
    assert CliRunner().invoke(main, ["report", str(run)]).exit_code == 0
