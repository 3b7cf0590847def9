"""Benchmark of the archive flow; prints one JSON line.

- ``first_run_seconds``: ``downcore run`` of 100 generated cores (tests/archive_factory.py,
  full chain: chronology, UK'37 calibration, reconstruction, events), ensemble 500, empty work
  store, default thread runner (2 workers), no report;
- ``rerun_fraction``: the same run again into a new folder with the same work store (nothing
  changed), wall time divided by the first run's;
- ``peak_memory_gib``: the largest resident set of any run process (``getrusage``, children);
- ``two_worker_speedup``: wall time of ``downcore run --dask-address`` on an existing Dask
  cluster with 1 worker over the same on a cluster with 2 workers (each with an empty work
  store), on ``--speedup-cores`` cores (default: the whole archive). As the README recommends
  for clusters, the workers and the runs share one Prefect server (started here, outside the
  timings); otherwise every worker starts a temporary server of its own (~10 s each).

Every run is a separate ``downcore run`` process, so each pays Prefect's start-up (~5-20 s on
a loaded machine), as a user would. Timings on a shared machine are inflated by the other
processes' load; the JSON line records the load average before and after.
"""

from __future__ import annotations

import argparse
import contextlib
import json
import os
import pathlib
import resource
import signal
import socket
import subprocess
import sys
import tempfile
import time
import urllib.request

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parents[1]))
from archive_factory import FULL_CHAIN, write_archive  # noqa: E402
from pipelines.flows.runners import ENV_DEFAULTS  # noqa: E402


def _downcore(args: list[str], env: dict[str, str]) -> float:
    command = [sys.executable, "-c", "from pipelines.cli import main; main()", *args, "-q", "--no-report"]
    start = time.perf_counter()
    done = subprocess.run(command, env=env, capture_output=True, text=True)
    seconds = time.perf_counter() - start
    if done.returncode != 0:
        raise SystemExit(f"downcore failed ({done.returncode}): {done.stderr[-2000:]}")
    return seconds


@contextlib.contextmanager
def _prefect_server(env: dict[str, str], home: pathlib.Path):
    """A Prefect server on 127.0.0.1 for the cluster runs; yields its API URL."""
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        port = sock.getsockname()[1]
    server_env = {**env, "PREFECT_HOME": str(home)}
    server_env.pop("PREFECT_API_URL", None)
    process = subprocess.Popen([sys.executable, "-m", "prefect", "server", "start", "--host", "127.0.0.1",
                                "--port", str(port)], env=server_env, stdout=subprocess.DEVNULL,
                               stderr=subprocess.DEVNULL, start_new_session=True)
    url = f"http://127.0.0.1:{port}/api"
    try:
        deadline = time.monotonic() + 120
        while True:
            try:
                with urllib.request.urlopen(f"{url}/health", timeout=2):
                    break
            except OSError:
                if time.monotonic() > deadline or process.poll() is not None:
                    raise SystemExit("the benchmark's Prefect server did not start")
                time.sleep(0.5)
        yield url
    finally:
        os.killpg(process.pid, signal.SIGTERM)
        process.wait(timeout=30)


def _on_dask_cluster(workers: int, config: pathlib.Path, root: pathlib.Path, env: dict[str, str]) -> float:
    """Wall time of one run on a fresh local cluster of ``workers`` single-threaded processes,
    reached by its address as a lab's existing cluster would be."""
    from distributed import LocalCluster

    saved = dict(os.environ)
    os.environ.update(env)  # inherited by the worker processes
    try:
        with LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, dashboard_address=":0",
                          local_directory=str(root / f"dask-scratch-{workers}")) as cluster:
            return _downcore(["run", str(config), "--out", str(root / "runs" / f"dask{workers}"),
                              "--cache-dir", str(root / f"cache-dask{workers}"),
                              "--dask-address", cluster.scheduler_address], env)
    finally:
        os.environ.clear()
        os.environ.update(saved)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cores", type=int, default=100)
    parser.add_argument("--ensemble", type=int, default=500)
    parser.add_argument("--speedup-cores", type=int, default=None,
                        help="cores of the Dask speedup runs (default: --cores)")
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

    speedup_cores = options.speedup_cores or options.cores
    subset = config if speedup_cores == options.cores else write_archive(
        root / "subset", n_cores=speedup_cores, ensemble=options.ensemble, extra_config=FULL_CHAIN)
    with _prefect_server(env, root / "server-home") as api_url:
        # the workers get the quiet defaults downcore gives its own process (a user's values win)
        cluster_env = {**ENV_DEFAULTS, **env, "PREFECT_API_URL": api_url}
        one = _on_dask_cluster(1, subset, root, cluster_env)
        two = _on_dask_cluster(2, subset, root, cluster_env)
    peak_kib = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    print(json.dumps({
        "first_run_seconds": round(first, 2),
        "rerun_fraction": round(again / first, 4),
        "peak_memory_gib": round(peak_kib / 1024 ** 2, 3),
        "two_worker_speedup": round(one / two, 3),
        "cores": options.cores, "ensemble": options.ensemble, "speedup_cores": speedup_cores,
        "rerun_seconds": round(again, 2), "dask_1_worker_seconds": round(one, 2),
        "dask_2_workers_seconds": round(two, 2), "cpu_count": os.cpu_count(),
        "load_average_before": round(load_before, 2), "load_average_after": round(os.getloadavg()[0], 2),
    }))


if __name__ == "__main__":
    main()
