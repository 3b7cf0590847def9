"""Benchmark of the archive flow; prints one JSON line.

- ``first_run_seconds``: ``downcore run`` of 100 generated cores (tests/archive_factory.py,
  full chain: chronology, UK'37 calibration, reconstruction, events), ensemble 500, empty work
  store, default thread runner (2 workers), no report;
- ``rerun_fraction``: the same run again into a new folder with the same work store (nothing
  changed), wall time divided by the first run's;
- ``peak_memory_gib``: the largest resident set of any run process (``getrusage``, children);
- ``two_worker_speedup``: wall time of a local Dask cluster with 1 worker over 2 workers
  (each with an empty work store) on ``--speedup-cores`` of the cores.

Every run is a separate ``downcore run`` process, so each pays Prefect's start-up (~5-20 s on
a loaded machine), as a user would. Timings on a shared machine are inflated by the other
processes' load; the JSON line records the load average before and after.
"""

from __future__ import annotations

import argparse
import json
import os
import pathlib
import resource
import subprocess
import sys
import tempfile
import time

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parents[1]))
from archive_factory import FULL_CHAIN, write_archive  # noqa: E402


def _downcore(args: list[str], env: dict[str, str]) -> float:
    command = [sys.executable, "-c", "from pipelines.cli import main; main()", *args, "-q", "--no-report"]
    start = time.perf_counter()
    done = subprocess.run(command, env=env, capture_output=True, text=True)
    seconds = time.perf_counter() - start
    if done.returncode != 0:
        raise SystemExit(f"downcore failed ({done.returncode}): {done.stderr[-2000:]}")
    return seconds


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cores", type=int, default=100)
    parser.add_argument("--ensemble", type=int, default=500)
    parser.add_argument("--speedup-cores", type=int, default=40)
    parser.add_argument("--workdir", type=pathlib.Path, default=None)
    options = parser.parse_args()

    root = options.workdir or pathlib.Path(tempfile.mkdtemp(prefix="downcore-bench-"))
    env = dict(os.environ)
    env.setdefault("PREFECT_HOME", str(root / "prefect-home"))
    load_before = os.getloadavg()[0]
    config = write_archive(root / "archive", n_cores=options.cores, ensemble=options.ensemble,
                           extra_config=FULL_CHAIN)
    cache = root / "cache"
    # warm-up: Prefect's database and imports, so the first timed run is not charged for them
    small = write_archive(root / "warm", n_cores=1, ensemble=20, n_dates=4, n_samples=10)
    _downcore(["run", str(small), "--out", str(root / "runs" / "warm"), "--cache-dir", str(root / "warm-cache")], env)

    first = _downcore(["run", str(config), "--out", str(root / "runs" / "first"), "--cache-dir", str(cache),
                       "--workers", "2"], env)
    again = _downcore(["run", str(config), "--out", str(root / "runs" / "again"), "--cache-dir", str(cache),
                       "--workers", "2"], env)

    subset = write_archive(root / "subset", n_cores=options.speedup_cores, ensemble=options.ensemble,
                           extra_config=FULL_CHAIN)
    one = _downcore(["run", str(subset), "--out", str(root / "runs" / "dask1"), "--cache-dir",
                     str(root / "cache-dask1"), "--dask-local", "--workers", "1"], env)
    two = _downcore(["run", str(subset), "--out", str(root / "runs" / "dask2"), "--cache-dir",
                     str(root / "cache-dask2"), "--dask-local", "--workers", "2"], env)
    peak_kib = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    print(json.dumps({
        "first_run_seconds": round(first, 2),
        "rerun_fraction": round(again / first, 4),
        "peak_memory_gib": round(peak_kib / 1024 ** 2, 3),
        "two_worker_speedup": round(one / two, 3),
        "cores": options.cores, "ensemble": options.ensemble, "speedup_cores": options.speedup_cores,
        "rerun_seconds": round(again, 2), "dask_1_worker_seconds": round(one, 2),
        "dask_2_workers_seconds": round(two, 2), "cpu_count": os.cpu_count(),
        "load_average_before": round(load_before, 2), "load_average_after": round(os.getloadavg()[0], 2),
    }))


if __name__ == "__main__":
    main()
