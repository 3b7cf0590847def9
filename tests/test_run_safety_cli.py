"""Runs cannot hurt each other, as a user meets it on the command line: a second run into a
busy folder and a resume of a live run are refused with an honest message and touch nothing;
``kill -9`` of a run leaves no process behind (its temporary Prefect server included); a
killed run resumes only with the config it was started with; a read-only work store and an
output folder inside a core stop the command at once with one message, ``-q`` or not."""

from __future__ import annotations

import os
import pathlib
import signal
import subprocess
import sys
import tempfile
import time

import pytest

from archive_factory import FULL_CHAIN, write_archive
from readonly import read_only_folder

pytestmark = [pytest.mark.slow,
              pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc")]


def _downcore(*args) -> list[str]:
    return [sys.executable, "-c", "from pipelines.cli import main; main()", *map(str, args)]


def _environment(prefect_home: pathlib.Path) -> dict[str, str]:
    return {**os.environ, "PREFECT_HOME": str(prefect_home)}


def _processes_of(prefect_home: pathlib.Path) -> list[int]:
    """Every live process whose environment names this PREFECT_HOME (a run and all it started)."""
    needle = f"PREFECT_HOME={prefect_home}\0".encode()
    found = []
    for entry in pathlib.Path("/proc").iterdir():
        if not entry.name.isdigit() or int(entry.name) == os.getpid():
            continue
        try:
            if needle in (entry / "environ").read_bytes():
                found.append(int(entry.name))
        except OSError:
            continue
    return found


def _files(folder: pathlib.Path) -> set[str]:
    return {p.relative_to(folder).as_posix() for p in folder.rglob("*") if p.is_file()}


@pytest.fixture(scope="module")
def archive(tmp_path_factory):
    root = tmp_path_factory.mktemp("safety")
    config = write_archive(root / "in", n_cores=8, ensemble=60, n_dates=5, n_samples=20, extra_config=FULL_CHAIN)
    return root, config


def test_busy_folder_live_resume_and_kill_minus_nine(archive):
    root, config = archive
    out, cache = root / "runs" / "live", root / "cache"
    home_a = pathlib.Path(tempfile.mkdtemp(prefix="downcore-safety-a-"))
    home_b = pathlib.Path(tempfile.mkdtemp(prefix="downcore-safety-b-"))
    # a slower run (larger ensemble), so that it is still going after the two refused commands
    # on a loaded machine (with ensemble 60 it once finished in between)
    config = config.with_name("live.toml")
    config.write_text(archive[1].read_text().replace("ensemble = 60", "ensemble = 600"))
    first = subprocess.Popen(_downcore("run", config, "--out", out, "--cache-dir", cache, "--workers", "1",
                                       "-q", "--no-report"), start_new_session=True,
                             stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env=_environment(home_a))
    try:
        deadline = time.time() + 240
        while time.time() < deadline and first.poll() is None and not (
                (out / ".downcore-lock").is_file() and len(_processes_of(home_a)) >= 2):
            time.sleep(0.2)
        assert first.poll() is None, first.stderr.read()
        before = _files(out)

        second = subprocess.run(_downcore("run", config, "--out", out, "--cache-dir", cache, "-q"),
                                capture_output=True, text=True, timeout=120, env=_environment(home_b))
        assert second.returncode == 2
        assert "a run is going" in second.stderr and f"pid {first.pid}" in second.stderr
        assert "--resume" not in second.stderr

        resumed = subprocess.run(_downcore("run", config, "--out", out, "--cache-dir", cache, "-q", "--resume"),
                                 capture_output=True, text=True, timeout=120, env=_environment(home_b))
        assert resumed.returncode == 2 and "a run is going" in resumed.stderr
        assert before <= _files(out), "a refused command removed files of the live run"
        assert first.poll() is None

        os.kill(first.pid, signal.SIGKILL)  # kill -9 of the run's own process, not its group
        first.wait(timeout=30)
        deadline = time.time() + 20
        while _processes_of(home_a) and time.time() < deadline:
            time.sleep(0.1)
        assert _processes_of(home_a) == [], "processes of the killed run are still running"
    finally:
        for pid in _processes_of(home_a):
            os.kill(pid, signal.SIGKILL)

    other = config.with_name("other.toml")
    other.write_text(config.read_text().replace("ensemble = 600", "ensemble = 61"))
    changed = subprocess.run(_downcore("run", other, "--out", out, "--cache-dir", cache, "-q", "--resume"),
                             capture_output=True, text=True, timeout=120, env=_environment(home_b))
    assert changed.returncode == 2 and "another config file" in changed.stderr, changed.stderr
    assert "--resume" in subprocess.run(_downcore("run", config, "--out", out, "-q"), capture_output=True,
                                        text=True, timeout=120, env=_environment(home_b)).stderr


@pytest.mark.parametrize("quiet", [["-q"], []])
def test_read_only_work_store_stops_at_once_with_one_message(archive, quiet):
    root, config = archive
    out = root / "runs" / f"ro{len(quiet)}"
    with read_only_folder(root / f"ro-cache{len(quiet)}") as cache:
        result = subprocess.run(_downcore("run", config, "--out", out, "--cache-dir", cache, *quiet),
                                capture_output=True, text=True, timeout=120)
    assert result.returncode == 2
    lines = [line for line in result.stderr.splitlines() if line.strip()]
    assert len(lines) == 1 and "work store (--cache-dir)" in lines[0] and "cannot be written" in lines[0], lines
    assert not out.exists()


def test_out_inside_a_core_folder_is_refused_and_the_core_untouched(archive):
    root, config = archive
    core = root / "in" / "cores" / "SYN-002"
    before = {p: p.read_bytes() for p in core.rglob("*") if p.is_file()}
    result = subprocess.run(_downcore("run", config, "--out", core / "run", "-q"),
                            capture_output=True, text=True, timeout=120)
    assert result.returncode == 2 and "inside the core folder" in result.stderr and "--out" in result.stderr
    assert {p: p.read_bytes() for p in core.rglob("*") if p.is_file()} == before


def test_quiet_run_with_failed_cores_still_says_so(tmp_path):
    config = write_archive(tmp_path / "in", n_cores=3, broken=1, ensemble=20, n_dates=4, n_samples=10)
    result = subprocess.run(_downcore("run", config, "--out", tmp_path / "run", "-q", "--no-report"),
                            capture_output=True, text=True, timeout=300)
    assert result.returncode == 3
    assert result.stdout == "" and "1 of 3 cores failed (SYN-002)" in result.stderr, result.stderr
