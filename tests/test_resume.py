"""Faults: a run killed midway (the whole process group, as PREFECT.md advises, since the
temporary Prefect server is a child process) and started again completes and reuses the
finished work; two runs at once into the same output root do not interfere."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time

import pytest

from archive_factory import FULL_CHAIN, write_archive

pytestmark = pytest.mark.slow


def _downcore(*args: str) -> list[str]:
    return [sys.executable, "-c", "from pipelines.cli import main; main()", *map(str, args)]


def _entries(cache, stage: str) -> int:
    folder = cache / stage
    return sum(1 for p in folder.glob("*/*") if (p / "entry.json").is_file()) if folder.is_dir() else 0


def _parquet(run):
    return {p.relative_to(run).as_posix(): p.read_bytes() for p in sorted(run.rglob("*.parquet"))}


def test_killed_run_resumes_and_reuses_finished_work(tmp_path):
    config = write_archive(tmp_path / "in", n_cores=8, ensemble=60, n_dates=5, n_samples=20,
                           extra_config=FULL_CHAIN)
    out, cache = tmp_path / "runs" / "r", tmp_path / "cache"
    command = _downcore("run", config, "--out", out, "--cache-dir", cache, "--workers", "1", "-q", "--no-report")
    process = subprocess.Popen(command, start_new_session=True, stdout=subprocess.DEVNULL,
                               stderr=subprocess.PIPE)
    deadline = time.time() + 240
    while _entries(cache, "chronology") < 2 and time.time() < deadline and process.poll() is None:
        time.sleep(0.2)
    assert process.poll() is None, f"run ended before it could be killed: {process.stderr.read()!r}"
    os.killpg(process.pid, signal.SIGKILL)
    process.wait(timeout=30)
    finished_before = _entries(cache, "chronology")
    assert finished_before >= 2
    assert not (out / "manifest.json").exists() and (out / ".downcore-in-progress").exists()
    for core in (p for p in out.iterdir() if p.is_dir() and not p.name.startswith(".")):
        assert (core / "log.txt").is_file(), "a core folder appears only when complete"

    refused = subprocess.run(_downcore("run", config, "--out", out, "--cache-dir", cache, "-q"),
                             capture_output=True, text=True, timeout=120)
    assert refused.returncode == 2 and "--resume" in refused.stderr

    resumed = subprocess.run(command + ["--resume"], capture_output=True, text=True, timeout=600)
    assert resumed.returncode == 0, resumed.stderr
    assert (out / "manifest.json").is_file() and not (out / ".downcore-in-progress").exists()
    import pandas as pd

    timings = pd.read_csv(out / "timings.csv")
    chronology = timings[timings["stage"] == "chronology"]
    assert len(chronology) == 8 and chronology["reused"].sum() >= finished_before
    assert not [p for p in out.rglob(".*") if p.name != ".downcore-in-progress"]


def test_two_runs_at_once_into_one_output_root(tmp_path):
    config = write_archive(tmp_path / "in", n_cores=4, ensemble=40, n_dates=4, n_samples=15,
                           extra_config=FULL_CHAIN)
    root = tmp_path / "runs"
    runs = [subprocess.Popen(_downcore("run", config, "--out", root / name, "-q", "--no-report"),
                             start_new_session=True, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
            for name in ("a", "b")]
    for process in runs:
        assert process.wait(timeout=600) == 0, process.stderr.read()
    a, b = _parquet(root / "a"), _parquet(root / "b")
    assert len(a) >= 30 and a == b
    assert (root / ".downcore-cache").is_dir()  # the shared work store next to the runs
    assert not [p for p in root.rglob(".*.tmp")]
