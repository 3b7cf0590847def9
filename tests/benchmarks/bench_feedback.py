"""Benchmark of how fast a user gets feedback; prints one JSON line.

- ``demo_seconds``: ``downcore demo --out DIR`` (the README's command), empty work store,
  report included; a separate process, as a user would run it;
- ``single_core_seconds``: one demo core (``ULLA-1``: dates, counts, training set, events)
  through the whole chain with its report, empty work store;
- ``cached_rerun_seconds``: the demo again into a new folder with the same work store
  (nothing changed), ``--no-report``;
- ``report_seconds``: rewriting the demo's report from its run folder
  (``write_run_report`` in a fresh process, imports included; exports not rewritten);
- ``report_megabytes``: size of the demo's ``report.html`` [MB = 10^6 bytes], with
  ``figures`` the number of figures on the page and ``figure_files`` those in figures/.

A warm-up run first creates Prefect's database under ``PREFECT_HOME``, so the timed runs are
not charged for that one-off set-up (a first run on a fresh machine pays it once). Timings
on a shared machine are inflated by the other processes' load; the line records the load
average before and after.
"""

from __future__ import annotations

import argparse
import json
import os
import pathlib
import shutil
import subprocess
import sys
import tempfile
import time

REPO = pathlib.Path(__file__).resolve().parents[2]
sys.path.insert(0, str(REPO))
from pipelines.flows.runners import ENV_DEFAULTS  # noqa: E402

DEMO = REPO / "demo_cores"
SINGLE_CORE = "ULLA-1"


def _timed(args: list[str], env: dict[str, str], cwd: pathlib.Path) -> float:
    command = [sys.executable, "-c", "from pipelines.cli import main; main()", *args]
    start = time.perf_counter()
    done = subprocess.run(command, env=env, cwd=cwd, capture_output=True, text=True)
    seconds = time.perf_counter() - start
    if done.returncode != 0:
        raise SystemExit(f"downcore {' '.join(args)} failed ({done.returncode}): {done.stderr[-2000:]}")
    return seconds


def _single_core_config(root: pathlib.Path) -> pathlib.Path:
    """A copy of the demo config that lists one core (the demo folder itself is never changed)."""
    folder = root / "single"
    shutil.copytree(DEMO, folder, ignore=shutil.ignore_patterns("truth", "make_demo.py"))
    config = folder / "run.toml"
    text = config.read_text(encoding="utf-8").replace('cores = ["cores/*"]', f'cores = ["cores/{SINGLE_CORE}"]')
    config.write_text(text, encoding="utf-8")
    return config


def _report_seconds(run: pathlib.Path, env: dict[str, str]) -> float:
    code = "import sys; from pipelines.report import write_run_report; write_run_report(sys.argv[1])"
    start = time.perf_counter()
    done = subprocess.run([sys.executable, "-c", code, str(run)], env=env, capture_output=True, text=True)
    if done.returncode != 0:
        raise SystemExit(f"report failed: {done.stderr[-2000:]}")
    return time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--workdir", type=pathlib.Path, default=None)
    options = parser.parse_args()
    root = options.workdir or pathlib.Path(tempfile.mkdtemp(prefix="downcore-feedback-"))
    root.mkdir(parents=True, exist_ok=True)
    env = {**ENV_DEFAULTS, **os.environ, "PYTHONPATH": str(REPO)}
    env.setdefault("PREFECT_HOME", str(root / "prefect-home"))
    env.pop("DOWNCORE_CACHE_DIR", None)
    load_before = os.getloadavg()[0]

    single = _single_core_config(root)
    _timed(["run", str(single), "--out", str(root / "warm"), "--cache-dir", str(root / "warm-cache"),
            "-q", "--no-report"], env, root)  # Prefect's database, imports from disk

    demo = _timed(["demo", "--out", str(root / "demo"), "--cache-dir", str(root / "cache"), "-q"], env, root)
    one = _timed(["run", str(single), "--out", str(root / "one"), "--cache-dir", str(root / "cache-one"), "-q"],
                 env, root)
    # the demo's config again (``downcore demo`` has no --no-report: this is the same run)
    again = _timed(["run", str(DEMO / "run.toml"), "--out", str(root / "again"), "--cache-dir",
                    str(root / "cache"), "-q", "--no-report"], env, root)
    report = _report_seconds(root / "demo", env)
    html = (root / "demo" / "report.html").read_text(encoding="utf-8")
    figure_files = sorted((root / "demo" / "figures").glob("*.svg"))
    print(json.dumps({
        "demo_seconds": round(demo, 2),
        "single_core_seconds": round(one, 2),
        "cached_rerun_seconds": round(again, 2),
        "report_seconds": round(report, 2),
        "report_megabytes": round(len(html.encode("utf-8")) / 1e6, 3),
        "figures": html.count('<figure class="plot"'), "figure_files": len(figure_files),
        "cpu_count": os.cpu_count(), "load_average_before": round(load_before, 2),
        "load_average_after": round(os.getloadavg()[0], 2),
    }))


if __name__ == "__main__":
    main()
