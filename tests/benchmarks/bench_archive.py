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

``--mode thousand`` is the scale check: 1,000 generated cores of mixed kinds (archive types
lake/marine/peat, 4-12 dates, 20-80 samples, 1 % broken), ensemble 500, the Dask speed-up
on ``--speedup-cores`` of them (default 100). Every mode also reports the peak resident set
of every process (each ``downcore`` run, its Prefect server, the Dask workers; sampled every
0.5 s, ``process_peaks_gib``) and of all of them together (``peak_total_gib``), and the
per-core overhead: wall time per core minus the science CPU per core (the stage seconds of
``timings.csv``, summed over cores, divided by the workers).

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
import threading
import time
import urllib.request

import pandas as pd
import psutil

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parents[1]))
from archive_factory import FULL_CHAIN, write_archive, write_core  # noqa: E402
from pipelines.flows.runners import ENV_DEFAULTS  # noqa: E402


class MemorySampler:
    """Largest resident set of every descendant process, sampled every ``period_s``."""

    def __init__(self, period_s: float = 0.5):
        self.period_s = period_s
        self.peaks: dict[str, int] = {}
        self.total_peak = 0
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)

    def _run(self) -> None:
        me = psutil.Process()
        while not self._stop.is_set():
            total = 0
            for proc in me.children(recursive=True):
                try:
                    rss = proc.memory_info().rss
                    name = " ".join(proc.cmdline()[1:4])[:80] or proc.name()
                except psutil.Error:
                    continue
                total += rss
                key = f"{proc.pid} {name}"
                self.peaks[key] = max(self.peaks.get(key, 0), rss)
            self.total_peak = max(self.total_peak, total + me.memory_info().rss)
            self._stop.wait(self.period_s)

    def __enter__(self) -> "MemorySampler":
        self._thread.start()
        return self

    def __exit__(self, *exc) -> None:
        self._stop.set()
        self._thread.join()

    def summary(self, top: int = 8) -> dict[str, float]:
        ranked = sorted(self.peaks.items(), key=lambda kv: kv[1], reverse=True)[:top]
        return {name: round(rss / 1024 ** 3, 3) for name, rss in ranked}


def write_mixed_archive(root: pathlib.Path, n_cores: int, ensemble: int) -> pathlib.Path:
    """``n_cores`` generated cores of mixed kinds (see the module docstring) and a config."""
    config = write_archive(root, n_cores=0, ensemble=ensemble, extra_config=FULL_CHAIN)
    kinds = ("lake", "marine", "peat")
    for index in range(n_cores):
        core_id = f"SYN-{index:04d}"
        broken = "negative_error" if index % 100 == 99 else None
        folder = write_core(root / "cores" / core_id, core_id, index, n_dates=4 + index % 9,
                            n_samples=20 + (index * 7) % 61, broken=broken)
        toml = folder / "core.toml"
        toml.write_text(toml.read_text(encoding="utf-8").replace(
            'archive = "lake"', f'archive = "{kinds[index % 3]}"'), encoding="utf-8")
    return config


def science_cpu_seconds(run: pathlib.Path) -> float:
    """Stage seconds of a run (timings.csv), summed over cores and stages."""
    timings = pd.read_csv(run / "timings.csv")
    return float(timings.loc[~timings["reused"].astype(bool), "seconds"].sum())


def _downcore(args: list[str], env: dict[str, str]) -> float:
    command = [sys.executable, "-c", "from pipelines.cli import main; main()", *args, "-q", "--no-report"]
    start = time.perf_counter()
    done = subprocess.run(command, env=env, capture_output=True, text=True)
    seconds = time.perf_counter() - start
    if done.returncode not in (0, 3):  # 3: complete, some (deliberately broken) cores failed
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
    parser.add_argument("--cores", type=int, default=None, help="default: 100 (thousand: 1000)")
    parser.add_argument("--ensemble", type=int, default=500)
    parser.add_argument("--speedup-cores", type=int, default=None,
                        help="cores of the Dask speedup runs (default: --cores)")
    parser.add_argument("--workdir", type=pathlib.Path, default=None)
    parser.add_argument("--mode", choices=("standard", "thousand"), default="standard",
                        help="thousand: 1,000 mixed cores, ensemble 500, speed-up on 100 of them")
    options = parser.parse_args()
    if options.mode == "thousand":
        options.cores = options.cores or 1000
        options.speedup_cores = options.speedup_cores or min(100, options.cores)
    options.cores = options.cores or 100
    with MemorySampler() as memory:
        line = _measure(options)
    line["peak_total_gib"] = round(memory.total_peak / 1024 ** 3, 3)
    line["process_peaks_gib"] = memory.summary()
    print(json.dumps(line))


def _measure(options: argparse.Namespace) -> dict:
    """Run every timed step; return the JSON line's fields."""

    root = options.workdir or pathlib.Path(tempfile.mkdtemp(prefix="downcore-bench-"))
    env = dict(os.environ)
    env.setdefault("PREFECT_HOME", str(root / "prefect-home"))
    load_before = os.getloadavg()[0]
    mixed = options.mode == "thousand"
    if mixed:
        config = write_mixed_archive(root / "archive", options.cores, options.ensemble)
    else:
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
    if speedup_cores == options.cores:
        subset = config
    elif mixed:
        subset = write_mixed_archive(root / "subset", speedup_cores, options.ensemble)
    else:
        subset = write_archive(root / "subset", n_cores=speedup_cores, ensemble=options.ensemble,
                               extra_config=FULL_CHAIN)
    with _prefect_server(env, root / "server-home") as api_url:
        # the workers get the quiet defaults downcore gives its own process (a user's values win)
        cluster_env = {**ENV_DEFAULTS, **env, "PREFECT_API_URL": api_url}
        one = _on_dask_cluster(1, subset, root, cluster_env)
        two = _on_dask_cluster(2, subset, root, cluster_env)
    peak_kib = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    science = science_cpu_seconds(root / "runs" / "first")
    return {
        "mode": options.mode,
        "first_run_seconds": round(first, 2),
        "per_core_overhead_seconds": round(first / options.cores - science / 2 / options.cores, 4),
        "science_cpu_seconds": round(science, 2),
        "rerun_fraction": round(again / first, 4),
        "peak_memory_gib": round(peak_kib / 1024 ** 2, 3),
        "two_worker_speedup": round(one / two, 3),
        "cores": options.cores, "ensemble": options.ensemble, "speedup_cores": speedup_cores,
        "rerun_seconds": round(again, 2), "dask_1_worker_seconds": round(one, 2),
        "dask_2_workers_seconds": round(two, 2), "cpu_count": os.cpu_count(),
        "load_average_before": round(load_before, 2), "load_average_after": round(os.getloadavg()[0], 2),
    }


if __name__ == "__main__":
    main()
