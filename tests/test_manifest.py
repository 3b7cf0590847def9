"""Manifest: input hashes, versions, output hashes, change detection."""

from __future__ import annotations

import hashlib
import json

import pytest

from pipelines.manifest import (MANIFEST_FORMAT, build_manifest, check_inputs, collect_input_files,
                                hash_inputs, hash_outputs, output_kind, read_manifest, write_manifest)


@pytest.fixture
def inputs(tmp_path):
    core = tmp_path / "cores" / "A"
    core.mkdir(parents=True)
    (core / "core.toml").write_text("[core]\nid='A'\n")
    (core / "dates.csv").write_text("label,depth_cm\n")
    (core / ".hidden").write_text("editor swap file")
    (tmp_path / "curves").mkdir()
    (tmp_path / "curves" / "c.14c").write_text("0,0,1,0,1\n")
    config = tmp_path / "run.toml"
    config.write_text("[run]\nseed=1\n")
    raw = {"run": {"seed": 1, "cores": ["cores/*"]}, "curves": {"atmosphere": "curves/c.14c"},
           "report": {"title": "not a file"}}
    return config, raw, [core]


def test_collects_config_core_files_and_referenced_files(inputs, tmp_path):
    config, raw, cores = inputs
    found = dict(collect_input_files(config, raw, cores))
    assert found[str(config.resolve())] == "config"
    assert found[str((tmp_path / "curves" / "c.14c").resolve())] == "curves"
    assert found[str((cores[0] / "dates.csv").resolve())] == "core"
    assert not any(p.endswith(".hidden") for p in found)
    assert len(found) == 4


def test_hashes_are_sha256_and_changes_are_detected(inputs, tmp_path):
    config, raw, cores = inputs
    entries = hash_inputs(collect_input_files(config, raw, cores))
    curve = next(e for e in entries if e["role"] == "curves")
    assert curve["sha256"] == hashlib.sha256(b"0,0,1,0,1\n").hexdigest()
    manifest = {"inputs": entries}
    assert check_inputs(manifest) == []
    (tmp_path / "curves" / "c.14c").write_text("0,0,2,0,1\n")
    (cores[0] / "dates.csv").unlink()
    changes = {c.path.rsplit("/", 1)[-1]: c for c in check_inputs(manifest)}
    assert set(changes) == {"c.14c", "dates.csv"}
    assert changes["dates.csv"].current_sha256 is None and "missing" in str(changes["dates.csv"])


def test_output_kinds():
    assert output_kind("A/chronology.parquet") == "table"
    assert output_kind("A/log.txt") == "log"
    assert output_kind("timings.csv") == "log"
    assert output_kind("exports/A.csv") == "export"
    assert output_kind("figures/a.svg") == "report"


def test_manifest_round_trip_and_outputs(inputs, tmp_path):
    config, raw, cores = inputs
    run = tmp_path / "run"
    (run / "A").mkdir(parents=True)
    (run / "A" / "x.parquet").write_bytes(b"abc")
    (run / ".downcore-in-progress").write_text("pid")
    manifest = build_manifest(config_path=config, config_text=config.read_text(),
                              resolved_config={"run": {"seed": 1}},
                              inputs=hash_inputs(collect_input_files(config, raw, cores)), run_seed=1,
                              streams=["chronology/A"], executor={"runner": "threads"},
                              cores=[{"core_id": "A", "status": "ok"}], run_dir=run,
                              started_utc="2026-12-01T00:00:00Z", seconds=1.0)
    write_manifest(run, manifest)
    back = read_manifest(run)
    assert back["format"] == MANIFEST_FORMAT
    assert back["outputs"] == {"A/x.parquet": {"sha256": hashlib.sha256(b"abc").hexdigest(), "kind": "table"}}
    assert back["seeds"]["run_seed"] == 1 and back["seeds"]["streams"] == ["chronology/A"]
    for package in ("python", "numpy", "pandas", "pyarrow", "prefect"):
        assert package in back["versions"]
    assert hash_outputs(run).keys() == {"A/x.parquet"}  # manifest and marker excluded


def test_read_manifest_rejects_other_json(tmp_path):
    (tmp_path / "manifest.json").write_text(json.dumps({"format": "other"}))
    with pytest.raises(ValueError, match="not a downcore manifest"):
        read_manifest(tmp_path)
    with pytest.raises(FileNotFoundError, match="unfinished run"):
        read_manifest(tmp_path / "nothing")
