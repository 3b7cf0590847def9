"""A run with nothing to compute is assembled from the work store without Prefect; any work
to do and the run goes through the archive flow."""

from __future__ import annotations

import pathlib

import pandas as pd
import pytest

from archive_factory import FULL_CHAIN, write_archive
from pipelines.flows import run as run_module
from pipelines.flows.assemble import NO_ORCHESTRATION_NOTE
from pipelines.flows.run import execute_run
from pipelines.flows.runners import ExecutorChoice
from pipelines.manifest import read_manifest

pytestmark = pytest.mark.usefixtures("prefect_harness")


def _tables(run: pathlib.Path) -> dict[str, bytes]:
    return {p.relative_to(run).as_posix(): p.read_bytes() for p in sorted(run.rglob("*.parquet"))}


def _files(run: pathlib.Path) -> list[str]:
    return sorted(p.relative_to(run).as_posix() for p in run.rglob("*") if p.is_file())


def _run(config, out, cache, **kwargs):
    return execute_run(config, out, cache_dir=cache, report=False, choice=ExecutorChoice(workers=2), **kwargs)


def test_nothing_to_compute_assembles_the_same_folder_without_the_flow(tmp_path, monkeypatch):
    config = write_archive(tmp_path, n_cores=2, ensemble=30, n_dates=4, n_samples=12, extra_config=FULL_CHAIN)
    first = _run(config, tmp_path / "r1", tmp_path / "cache")
    assert NO_ORCHESTRATION_NOTE not in first.notes  # work to do: through Prefect
    flows = []
    monkeypatch.setattr(run_module, "_orchestrated", lambda *a, **k: flows.append(a) or pytest.fail("flow ran"))
    second = _run(config, tmp_path / "r2", tmp_path / "cache")
    assert flows == []
    assert NO_ORCHESTRATION_NOTE in second.notes
    assert NO_ORCHESTRATION_NOTE in read_manifest(second.run_dir)["notes"]
    assert _tables(second.run_dir) == _tables(first.run_dir)
    assert _files(second.run_dir) == _files(first.run_dir)
    assert "reused from the cache" in (second.run_dir / "SYN-000" / "log.txt").read_text()
    assert second.timings["reused"].all()
    pd.testing.assert_frame_equal(second.summary, first.summary)
    assert set(read_manifest(second.run_dir)["outputs"]) == set(read_manifest(first.run_dir)["outputs"])


def test_one_changed_input_goes_through_the_flow_and_writes_nothing_before(tmp_path, monkeypatch):
    config = write_archive(tmp_path, n_cores=2, ensemble=30, n_dates=4, n_samples=12)
    _run(config, tmp_path / "r1", tmp_path / "cache")
    dates = tmp_path / "cores" / "SYN-001" / "dates.csv"
    dates.write_text(dates.read_text().replace(",30\n", ",35\n", 1))
    seen = []
    real = run_module._orchestrated

    def orchestrated(run_dir, *args, **kwargs):
        seen.append(sorted(p.name for p in run_dir.iterdir() if not p.name.startswith(".")))
        return real(run_dir, *args, **kwargs)

    monkeypatch.setattr(run_module, "_orchestrated", orchestrated)
    second = _run(config, tmp_path / "r2", tmp_path / "cache")
    assert seen == [[]]  # the store-only walk stopped before publishing any core folder
    assert NO_ORCHESTRATION_NOTE not in second.notes
    reused = second.timings.set_index(["core_id", "stage"])["reused"]
    assert reused.loc[("SYN-000", "chronology")] and not reused.loc[("SYN-001", "chronology")]


def test_recompute_never_assembles(tmp_path):
    config = write_archive(tmp_path, n_cores=1, ensemble=20, n_dates=4, n_samples=10)
    _run(config, tmp_path / "r1", tmp_path / "cache")
    again = _run(config, tmp_path / "r2", tmp_path / "cache", recompute=True)
    assert NO_ORCHESTRATION_NOTE not in again.notes
    assert not again.timings["reused"].any()
