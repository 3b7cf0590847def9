"""A run on a Dask cluster (2 worker processes, reached by its address as with
``--dask-address``) gives the same bytes as a run on local threads.

Determinism across executors rests on seeds derived from stable names
(``rng_for(run_seed, stage, core_id)``), BLAS pinned to one thread in every task and tables
written in a fixed order (../shared/PREFECT.md, "Determinism across executors").
"""

from __future__ import annotations

import pytest

from archive_factory import FULL_CHAIN, write_archive
from pipelines.flows.run import execute_run
from pipelines.flows.runners import ExecutorChoice

pytestmark = [pytest.mark.slow, pytest.mark.usefixtures("prefect_harness")]


def _parquet(run):
    return {p.relative_to(run).as_posix(): p.read_bytes() for p in sorted(run.rglob("*.parquet"))}


def test_dask_cluster_run_gives_the_same_bytes_as_threads(tmp_path):
    from distributed import LocalCluster

    config = write_archive(tmp_path, n_cores=4, broken=1, ensemble=40, n_dates=4, n_samples=15,
                           extra_config=FULL_CHAIN)
    local = execute_run(config, tmp_path / "threads", cache_dir=tmp_path / "cache-threads",
                        choice=ExecutorChoice(workers=2), report=False)
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0",
                      local_directory=str(tmp_path / "dask")) as cluster:
        remote = execute_run(config, tmp_path / "dask-run", cache_dir=tmp_path / "cache-dask",
                             choice=ExecutorChoice(dask_address=cluster.scheduler_address), report=False)
    assert list(remote.summary["status"]) == list(local.summary["status"]) == ["ok", "ok", "ok", "failed"]
    assert not remote.timings["reused"].any(), f"the Dask run must compute, not reuse the cache:\n{remote.timings}"
    local_bytes, remote_bytes = _parquet(local.run_dir), _parquet(remote.run_dir)
    assert set(local_bytes) == set(remote_bytes) and len(local_bytes) >= 30
    differing = [name for name in local_bytes if local_bytes[name] != remote_bytes[name]]
    assert differing == []
