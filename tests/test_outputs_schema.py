"""The run-folder schema (pipelines/outputs_schema.py): writers are held to it, the test
factory writes through it, and the README's table of run-folder files is generated from it.

That a real run writes only declared columns is checked on a real pipeline run in
tests/test_flows.py and on the demo in tests/test_demo_end_to_end.py.
"""

from __future__ import annotations

import pathlib

import numpy as np
import pandas as pd
import pytest

from pipelines.outputs_schema import (TABLES, SchemaError, checked, frame_problems, markdown_table,
                                      refresh_readme, run_folder_problems, table_for_path)
from pipelines.runfolder import atomic_write_parquet
from run_folder_factory import make_run_folder

README = pathlib.Path(__file__).resolve().parents[1] / "README.md"


def _event_probability(**extra):
    return pd.DataFrame({"age_cal_bp": [0.0, 10.0], "variable": ["sst", "sst"],
                         "probability": [0.1, 0.2], **extra})


def test_an_undeclared_column_is_refused():
    frame = _event_probability(guessed_name=[1.0, 2.0])
    with pytest.raises(SchemaError, match="guessed_name"):
        checked("event_probability", frame)
    assert checked("event_probability", _event_probability()) is not None


def test_a_missing_required_column_and_a_wrong_dtype_are_reported():
    problems = frame_problems("event_probability", _event_probability().drop(columns="variable"))
    assert problems == ["<core>/event_probability.parquet: required column 'variable' is missing"]
    wrong = _event_probability()
    wrong["probability"] = ["high", "low"]
    [problem] = frame_problems("event_probability", wrong)
    assert problem.startswith("<core>/event_probability.parquet: column 'probability' is ")
    assert problem.endswith("string, declared float")


def test_families_and_empty_tables():
    """Member columns are a declared family; a table without rows is checked by name only."""
    members = pd.DataFrame({"depth_cm": [1.0], "m0000": [10.0], "m0001": [11.0]})
    assert frame_problems("age_ensemble", members) == []
    assert frame_problems("age_ensemble", members.rename(columns={"m0001": "member_1"}))
    empty = pd.DataFrame({c: pd.Series([], dtype=object) for c in TABLES["events"].names})
    assert frame_problems("events", empty) == []


def test_paths_map_to_their_declarations():
    assert table_for_path("TEL-07/dates.parquet").key == "dates"
    assert table_for_path("training/midges_skill.parquet").key == "training_skill"
    assert table_for_path("stack.parquet").key == "stack"
    assert table_for_path("TEL-07/notes.parquet") is None


def test_the_factory_run_folder_fits_the_schema(tmp_path):
    run = make_run_folder(tmp_path / "run")
    assert run_folder_problems(run) == []
    atomic_write_parquet(run / "TARN-2" / "extra.parquet", pd.DataFrame({"x": np.arange(2)}))
    assert run_folder_problems(run) == ["TARN-2/extra.parquet: file not declared in the run-folder schema"]


def test_readme_run_folder_table_is_generated_from_the_schema():
    """After changing a declaration: python -m pipelines.outputs_schema README.md"""
    text = README.read_text(encoding="utf-8")
    assert "<!-- tables:run-folder -->" in text
    assert refresh_readme(text) == text
    for spec in TABLES.values():
        assert f"`{spec.path}`" in markdown_table()
