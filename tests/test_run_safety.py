"""Runs cannot hurt each other: the run lock, where a run may write, a work store that cannot
be written, and child processes that never outlive their parent (quick, in-process and with
small helper processes; the whole-command scenarios are in test_run_safety_cli.py)."""

from __future__ import annotations

import json
import os
import signal
import socket
import subprocess
import sys
import textwrap
import time

import pytest

from archive_factory import write_archive
from pipelines.flows.plan import build_plan
from pipelines.runfolder import (IN_PROGRESS_MARKER, RunFolderError, create_run_folder,
                                 ensure_writable_folder, release_run_folder)
from pipelines.runlock import LOCK_NAME, read_lock_record, run_identity
from pipelines.runpaths import location_problems
from readonly import read_only_folder

IDENTITY = {"config": "/somewhere/run.toml", "config_sha256": "a" * 64}

#: a helper process that takes a run folder's lock, says so, and then waits to be killed
HOLDER = textwrap.dedent("""
    import sys, time
    from pipelines.runfolder import create_run_folder
    folder = create_run_folder(sys.argv[1], identity={"config": "/somewhere/run.toml",
                                                      "config_sha256": "a" * 64})
    (folder / "half.parquet").write_bytes(b"partial")
    print("held", flush=True)
    time.sleep(120)
""")


@pytest.fixture()
def holder(tmp_path):
    """A live run (another process) holding ``tmp_path / 'run'``."""
    folder = tmp_path / "run"
    process = subprocess.Popen([sys.executable, "-c", HOLDER, str(folder)], stdout=subprocess.PIPE,
                               text=True, env={**os.environ, "PYTHONPATH": os.pathsep.join(sys.path)})
    assert process.stdout.readline().strip() == "held"
    yield folder, process
    if process.poll() is None:
        process.kill()
    process.wait(timeout=10)


def test_the_lock_records_the_owner_pid_and_host(holder):
    folder, process = holder
    record = read_lock_record(folder)
    assert record["pid"] == process.pid and record["host"] == socket.gethostname()
    assert record["state"] == "running" and record["config_sha256"] == "a" * 64


@pytest.mark.parametrize("resume", [False, True])
def test_a_live_run_is_refused_and_its_files_are_left_alone(holder, resume):
    folder, process = holder
    with pytest.raises(RunFolderError) as info:
        create_run_folder(folder, resume=resume, identity=IDENTITY)
    message = str(info.value.strerror)
    assert "a run is going" in message and f"pid {process.pid}" in message
    assert "--resume" not in message  # the way there is not suggested
    assert (folder / "half.parquet").read_bytes() == b"partial"


def test_a_killed_run_is_resumable_with_its_own_config_only(holder):
    folder, process = holder
    process.send_signal(signal.SIGKILL)
    process.wait(timeout=10)
    with pytest.raises(RunFolderError, match="process is gone.*--resume"):
        create_run_folder(folder, identity=IDENTITY)
    other = {**IDENTITY, "config_sha256": "b" * 64}
    with pytest.raises(RunFolderError, match="changed config"):
        create_run_folder(folder, resume=True, identity=other)
    assert (folder / "half.parquet").exists()
    create_run_folder(folder, resume=True, identity=IDENTITY)
    assert not (folder / "half.parquet").exists()
    assert read_lock_record(folder)["pid"] == os.getpid()
    release_run_folder(folder, finished=True)
    assert not (folder / LOCK_NAME).exists() and not (folder / IN_PROGRESS_MARKER).exists()


def test_a_run_started_on_another_host_is_not_taken_over(tmp_path):
    folder = tmp_path / "run"
    folder.mkdir()
    (folder / IN_PROGRESS_MARKER).write_text("pid 1\n")
    (folder / LOCK_NAME).write_text(json.dumps({"pid": 1, "host": "another-host.invalid",
                                                "state": "running", **IDENTITY}))
    with pytest.raises(RunFolderError, match="another host.*delete"):
        create_run_folder(folder, resume=True, identity=IDENTITY)


def test_a_finished_run_folder_gets_no_lock_file(tmp_path):
    folder = tmp_path / "run"
    folder.mkdir()
    (folder / "manifest.json").write_text("{}")
    with pytest.raises(RunFolderError, match="never overwrites"):
        create_run_folder(folder, resume=True)
    assert sorted(p.name for p in folder.iterdir()) == ["manifest.json"]


@pytest.fixture(scope="module")
def plan(tmp_path_factory):
    root = tmp_path_factory.mktemp("places")
    return build_plan(write_archive(root, n_cores=2, ensemble=20, n_dates=4, n_samples=10)), root


@pytest.mark.parametrize("out, cache, words", [
    ("cores/SYN-000/run", "elsewhere/cache", "--out .* inside the core folder"),
    ("runs/a", "cores/SYN-001/.cache", "--cache-dir .* inside the core folder"),
    ("cores/run-1", "elsewhere/cache", "matches the cores pattern 'cores/\\*'.*read it as a core"),
    ("runs/a", ".", "--cache-dir .* holds the core folder"),
    ("runs/a", "curves/..", "holds the input file .*run.toml"),
])
def test_outputs_inside_or_around_inputs_are_refused(plan, out, cache, words):
    plan, root = plan
    problems = location_problems(plan, root / out, root / cache)
    assert problems and any(__import__("re").search(words, str(p)) for p in problems), problems
    assert all(p.column in ("--out", "--cache-dir") for p in problems)


def test_ordinary_places_are_accepted(plan):
    plan, root = plan
    assert location_problems(plan, root / "runs" / "a", root / "runs" / ".downcore-cache") == []
    assert location_problems(plan, root / "runs" / "a", root / ".downcore-cache") == []


def test_a_run_folder_left_inside_a_core_is_refused(plan):
    plan, root = plan
    stale = root / "cores" / "SYN-001" / "old-run"
    stale.mkdir()
    (stale / "manifest.json").write_text("{}")
    try:
        problems = location_problems(plan, root / "runs" / "b", root / "runs" / ".cache")
    finally:
        (stale / "manifest.json").unlink()
        stale.rmdir()
    assert [p.column for p in problems] == ["run.cores"] and "old-run" in problems[0].message


def test_a_read_only_work_store_is_named_with_a_fix(tmp_path):
    with read_only_folder(tmp_path / "cache") as cache:
        with pytest.raises(RunFolderError) as info:
            ensure_writable_folder(cache, "the work store (--cache-dir)")
        assert "the work store (--cache-dir)" in info.value.strerror and "cannot be written" in info.value.strerror
        assert "read-only" in info.value.strerror or "permission denied" in info.value.strerror


PARENT = textwrap.dedent("""
    import sys, time
    from pipelines.lifeline import spawn_tied_to_parent
    child = spawn_tied_to_parent([sys.executable, "-c", "import time; time.sleep(120)"])
    print(child.pid, flush=True)
    time.sleep(120)
""")


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    with open(f"/proc/{pid}/stat") as handle:  # a zombie is not alive
        return handle.read().split(")")[-1].split()[0] != "Z"


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc")
def test_a_tied_child_ends_when_its_parent_is_killed_with_sigkill():
    parent = subprocess.Popen([sys.executable, "-c", PARENT], stdout=subprocess.PIPE, text=True,
                              start_new_session=True,
                              env={**os.environ, "PYTHONPATH": os.pathsep.join(sys.path)})
    child = int(parent.stdout.readline())
    assert _alive(child)
    os.killpg(parent.pid, signal.SIGKILL)  # the parent's whole group: the child is not in it
    parent.wait(timeout=10)
    deadline = time.monotonic() + 10
    while _alive(child) and time.monotonic() < deadline:
        time.sleep(0.05)
    assert not _alive(child), "the child outlived its killed parent"
