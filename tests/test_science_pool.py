"""The science pool (pipelines/flows/science_pool.py): stages run in worker processes give the
same bytes as in the tasks' threads, a failing core fails at its stage while the others go
on, a worker that dies is replaced, and the workers never outlive their run.

The pool is off in the rest of the suite (conftest.py sets ``DOWNCORE_SCIENCE_PROCESSES=0``, so
that a test patching a function of this process sees its patch used); here it is on.
"""

from __future__ import annotations

import os
import pathlib
import signal
import subprocess
import sys
import threading
import time
from concurrent.futures.process import BrokenProcessPool

import psutil
import pytest

from archive_factory import FULL_CHAIN, write_archive
from pipelines.flows import science_pool
from pipelines.flows.run import execute_run
from pipelines.flows.runners import ExecutorChoice

pytestmark = [pytest.mark.slow, pytest.mark.usefixtures("prefect_harness")]


def _parquet(run: pathlib.Path) -> dict[str, bytes]:
    return {p.relative_to(run).as_posix(): p.read_bytes() for p in sorted(run.rglob("*.parquet"))}


@pytest.fixture
def pool_on(monkeypatch):
    monkeypatch.setenv(science_pool.PROCESSES_ENV, "2")


def _archive_with_failing_chronology(root: pathlib.Path) -> pathlib.Path:
    """Four cores: SYN-003 has a broken samples table (fails at ingest), SYN-002 a date far
    older than the invented curve reaches (fails at chronology)."""
    config = write_archive(root, n_cores=4, broken=1, ensemble=40, n_dates=4, n_samples=15,
                           extra_config=FULL_CHAIN)
    dates = root / "cores" / "SYN-002" / "dates.csv"
    lines = dates.read_text(encoding="utf-8").splitlines()
    cells = lines[-1].split(",")
    header = lines[0].split(",")
    cells[header.index("age")] = "54000"
    dates.write_text("\n".join(lines[:-1] + [",".join(cells)]) + "\n", encoding="utf-8")
    return config


def test_pool_run_gives_the_same_bytes_and_failures_as_threads(tmp_path, pool_on, monkeypatch):
    from pipelines.flows.shared import SHARED

    config = _archive_with_failing_chronology(tmp_path)
    SHARED.clear()
    pooled = execute_run(config, tmp_path / "pool", cache_dir=tmp_path / "cache-pool",
                         choice=ExecutorChoice(workers=2), report=False)
    assert SHARED.reads == 0, "with the pool, the stages read their inputs in the workers"
    assert not list((tmp_path / "cache-pool").glob(".head-start-*")), "the head start's side store is removed"
    _, alive = psutil.wait_procs(_workers(), timeout=10)
    assert alive == [], "the workers end with the run's flow"
    monkeypatch.setenv(science_pool.PROCESSES_ENV, "0")
    threads = execute_run(config, tmp_path / "threads", cache_dir=tmp_path / "cache-threads",
                          choice=ExecutorChoice(workers=2), report=False)
    assert SHARED.reads > 0
    columns = ["core_id", "status", "stage_reached", "error", "warnings", "notes"]
    assert pooled.summary[columns].equals(threads.summary[columns])
    assert list(pooled.summary["status"]) == ["ok", "ok", "failed", "failed"]
    assert list(pooled.summary["stage_reached"]) == ["events", "events", "ingest", "none"]
    assert pooled.summary["error"][2].startswith("chronology: ")  # failed at chronology, in a worker
    assert not pooled.timings["reused"].any()
    pooled_bytes, thread_bytes = _parquet(pooled.run_dir), _parquet(threads.run_dir)
    assert set(pooled_bytes) == set(thread_bytes) and len(pooled_bytes) >= 30
    assert [name for name in pooled_bytes if pooled_bytes[name] != thread_bytes[name]] == []


def test_pool_size_follows_cpus_threads_cores_and_the_environment(monkeypatch):
    monkeypatch.delenv(science_pool.PROCESSES_ENV, raising=False)
    assert science_pool.pool_size(threads=2, units=4, cpus=2) == 2
    assert science_pool.pool_size(threads=8, units=3, cpus=4) == 3
    assert science_pool.pool_size(threads=2, units=1, cpus=2) == 1  # one core: its head start
    assert science_pool.pool_size(threads=2, units=4, cpus=1) == 0  # one CPU: no pool
    assert science_pool.pool_size(threads=1, units=9, cpus=2) == 0  # one thread: no pool
    monkeypatch.setenv(science_pool.PROCESSES_ENV, "0")
    assert science_pool.pool_size(threads=2, units=4, cpus=2) == 0
    monkeypatch.setenv(science_pool.PROCESSES_ENV, "3")
    assert science_pool.pool_size(threads=2, units=1, cpus=2) == 3
    monkeypatch.setenv(science_pool.PROCESSES_ENV, "two")
    with pytest.raises(ValueError, match="DOWNCORE_SCIENCE_PROCESSES"):
        science_pool.pool_size(threads=2, units=4, cpus=2)


def test_a_call_that_kills_its_worker_twice_raises_and_the_pool_goes_on():
    pool = science_pool.SciencePool(1)
    try:
        assert pool.call(os.getpid) != os.getpid()
        with pytest.raises(BrokenProcessPool):
            pool.call(os._exit, 3)
        assert pool.call(int, "7") == 7  # a fresh pool took over
    finally:
        pool.close()


def test_a_call_that_meets_a_pool_renewed_by_another_thread_goes_to_the_new_pool():
    """Two threads notice a broken pool; one renews it and shuts the old one down while the
    other is about to submit to it ("cannot schedule new futures after shutdown"): the call
    goes to the new pool, and a genuine error of the call itself still surfaces."""
    pool = science_pool.SciencePool(1)
    stale = pool._current()
    try:
        pool._renew(stale)  # what the other thread did: stale is now shut down
        assert pool._current() is not stale
        calls = []
        real_current = pool._current

        def current_once_stale():
            calls.append(1)
            return stale if len(calls) == 1 else real_current()

        pool._current = current_once_stale
        assert pool.call(int, "7") == 7
        assert len(calls) >= 2
        pool._current = real_current
        with pytest.raises(ValueError):
            pool.call(int, "not a number")
    finally:
        pool.close()


def _workers(root: psutil.Process | None = None) -> list[psutil.Process]:
    """The helper processes of ``root`` (default: this process): spawned ones (its children
    running ``spawn_main``) or forked ones (children of its fork server)."""
    root = root or psutil.Process()
    found = []
    for child in root.children(recursive=True):
        try:
            parent = child.parent()
            forked = parent is not None and parent.pid != root.pid and "forkserver" in " ".join(parent.cmdline())
            if forked or (child.ppid() == root.pid and "spawn_main" in " ".join(child.cmdline())):
                found.append(child)
        except psutil.Error:  # ended meanwhile
            pass
    return found


def test_a_worker_killed_during_a_run_is_replaced_and_the_run_completes(tmp_path, pool_on):
    config = write_archive(tmp_path, n_cores=4, ensemble=200, n_dates=6, n_samples=30, extra_config=FULL_CHAIN)
    outcome: dict = {}
    thread = threading.Thread(target=lambda: outcome.update(run=execute_run(
        config, tmp_path / "run", cache_dir=tmp_path / "cache", choice=ExecutorChoice(workers=2), report=False)))
    thread.start()
    deadline = time.monotonic() + 120
    while not (tmp_path / "cache" / "chronology").is_dir() and time.monotonic() < deadline:
        time.sleep(0.05)  # the first chronology has started
    victims = _workers()
    assert victims, "no science worker found"
    victims[0].kill()
    thread.join(timeout=300)
    assert not thread.is_alive()
    assert list(outcome["run"].summary["status"]) == ["ok"] * 4


def test_workers_end_when_the_run_process_is_killed_and_the_run_resumes(tmp_path):
    """``kill -9`` of downcore alone (not its process group): its science workers notice and
    exit; ``--resume`` then finishes the run, reusing the stages the workers had finished."""
    config = write_archive(tmp_path / "in", n_cores=4, ensemble=200, n_dates=6, n_samples=30,
                           extra_config=FULL_CHAIN)
    env = {**os.environ, science_pool.PROCESSES_ENV: "2"}
    command = [sys.executable, "-c", "from pipelines.cli import main; main()", "run", str(config),
               "--out", str(tmp_path / "run"), "--cache-dir", str(tmp_path / "cache"), "-q", "--no-report"]
    process = subprocess.Popen(command, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                               start_new_session=True)
    try:
        deadline = time.monotonic() + 120
        chronologies = tmp_path / "cache" / "chronology"
        while not (chronologies.is_dir() and list(chronologies.glob("*/*/entry.json"))) \
                and time.monotonic() < deadline:
            time.sleep(0.05)
        workers = _workers(psutil.Process(process.pid))
        assert len(workers) == 2
        process.kill()
        process.wait(timeout=30)
        _, alive = psutil.wait_procs(workers, timeout=10)
        assert alive == []
    finally:
        try:
            os.killpg(process.pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
    resumed = subprocess.run(command + ["--resume"], env=env, capture_output=True, text=True, timeout=300)
    assert resumed.returncode == 0, resumed.stderr[-2000:]
    import pandas as pd

    timings = pd.read_csv(tmp_path / "run" / "timings.csv")
    assert timings.loc[timings["stage"] == "chronology", "reused"].any()


def test_side_stores_of_ended_runs_are_removed(tmp_path):
    from pipelines.flows.head_start import SIDE_PREFIX, HeadStart

    ended = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True,
                           text=True).stdout.strip()
    abandoned = tmp_path / f"{SIDE_PREFIX}{ended}-1"
    alive = tmp_path / f"{SIDE_PREFIX}{os.getpid()}-1"
    for folder in (abandoned, alive):
        (folder / "results").mkdir(parents=True)
    HeadStart(str(tmp_path))
    assert not abandoned.exists() and alive.exists()
