"""Ingest of core folders: conversion to cm and composite depth, every problem in one pass,
and inputs left untouched."""

import hashlib
import shutil
import tomllib
from pathlib import Path

import numpy as np
import pytest

from pipelines.ingest import inspect_core, load_core
from proxies.cores import Core
from proxies.problems import InputError

DATA = Path(__file__).parent / "data"
GOOD = DATA / "good_core"
BROKEN = sorted(p for p in (DATA / "broken_cores").iterdir() if p.is_dir())

CORE_TOML = """[core]
id = "TMP-1"
archive = "marine"
latitude = -12.5
longitude = 170.0
collected = {collected}
depth_unit = "{unit}"

[files]
samples = "samples.csv"
dates = "dates.csv"
{extra}
"""


def write_core(folder: Path, samples: str, dates: str, unit: str = "cm", collected: int = 2010,
               extra: str = "", counts: str | None = None) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    if counts is not None:
        extra = 'counts = "counts.csv"\n' + extra
        (folder / "counts.csv").write_text(counts)
    (folder / "core.toml").write_text(CORE_TOML.format(unit=unit, collected=collected, extra=extra))
    (folder / "samples.csv").write_text(samples)
    (folder / "dates.csv").write_text(dates)
    return folder


def hashes(folder: Path) -> dict[str, str]:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(folder.rglob("*")) if p.is_file()}


def test_good_core_loads_with_composite_depths_and_file_rows():
    core = load_core(GOOD)
    assert isinstance(core, Core)
    assert core.id == "GOOD-1" and core.collected_ce == 2018 and core.top_age_error == 5.0
    # section B starts at 95 cm: 2.5 cm below its top is 97.5 cm composite
    assert core.samples["depth_cm"].tolist()[6:9] == [82.5, 97.5, 122.5]
    assert core.samples["section_depth_cm"].tolist()[7] == 2.5
    assert core.samples["source_row"].tolist() == list(range(2, 14))  # file order, never sorted
    assert core.proxy_columns == ("uk37", "d18o_permil")
    assert np.isnan(core.samples.loc[2, "d18o_permil"])  # empty cell = missing
    assert core.dates["kind"].tolist().count("radiocarbon") == 5
    assert core.dates["exclude"].tolist() == [False, False, False, False, True, False, False]
    assert core.dates["curve"].tolist()[0] is None
    assert core.counts["depth_cm"].tolist() == [2.5, 32.5, 62.5, 122.5, 162.5]
    assert [(layer.top_cm, layer.bottom_cm) for layer in core.event_layers] == [(40.0, 44.5)]
    assert core.hiatuses_cm == (150.0,)


@pytest.mark.parametrize("unit, factor", [("mm", 0.1), ("m", 100.0), ("cm", 1.0)])
def test_depth_units_are_converted_to_cm(tmp_path, unit, factor):
    layers = "[[event_layers]]\ntop = 2.0\nbottom = 3.0\n\n[[hiatuses]]\ndepth = 4.0\n"
    folder = write_core(
        tmp_path / "core",
        f"depth_{unit},thickness_{unit},uk37\n1.0,0.5,0.4\n5.0,0.5,0.5\n",
        f"label,depth_{unit},thickness_{unit},kind,age,error\nA,5.0,1.0,radiocarbon,900,30\n",
        unit=unit, extra=layers,
    )
    core = load_core(folder)
    np.testing.assert_allclose(core.samples["depth_cm"], np.array([1.0, 5.0]) * factor)
    np.testing.assert_allclose(core.samples["thickness_cm"], [0.5 * factor] * 2)
    np.testing.assert_allclose(core.dates["depth_cm"], [5.0 * factor])
    np.testing.assert_allclose(core.dates["thickness_cm"], [1.0 * factor])
    assert core.event_layers[0].top_cm == pytest.approx(2.0 * factor)
    assert core.hiatuses_cm == pytest.approx((4.0 * factor,))


def test_every_problem_is_collected_in_one_pass(tmp_path):
    folder = write_core(
        tmp_path / "core",
        "depth_cm,uk37,uk37_error\n1,0.4,0.01\n1,abc,-1\n2,0.5,\n",
        "label,depth_cm,kind,age,error,exclude\nA,1,radiocarbon,900,0,maybe\nA,2,optical,100,10,\n",
    )
    core, problems = inspect_core(folder)
    assert core is None
    found = {(Path(p.file).name, p.row, p.column) for p in problems}
    assert found == {
        ("samples.csv", 3, "depth_cm"),  # duplicate depth
        ("samples.csv", 3, "uk37"),  # not a number
        ("samples.csv", 3, "uk37_error"),  # negative error
        ("dates.csv", 2, "error"),  # zero error
        ("dates.csv", 2, "exclude"),  # not a boolean
        ("dates.csv", 3, "label"),  # duplicate label
        ("dates.csv", 3, "kind"),  # unknown kind
    }
    with pytest.raises(InputError) as caught:
        load_core(folder)
    assert len(caught.value.problems) == len(problems)
    assert all(p.fix for p in problems)


def test_core_toml_problems_are_all_reported(tmp_path):
    folder = tmp_path / "core"
    folder.mkdir()
    (folder / "core.toml").write_text(
        '[core]\nid = "a b"\narchive = "cave"\nlatitude = 91\nlongitude = "east"\ncollected = 1700\n'
        'depth_unit = "ft"\ncolour = "grey"\n[files]\nsamples = "s.csv"\n[extra]\n'
    )
    _, problems = inspect_core(folder)
    columns = {p.column for p in problems}
    assert {"core.id", "core.archive", "core.latitude", "core.longitude", "core.collected",
            "core.depth_unit", "core.colour", "files.dates", "extra"} <= columns


def test_collection_year_in_the_future_uses_the_injected_year(tmp_path):
    folder = write_core(tmp_path / "c", "depth_cm,uk37\n1,0.4\n", "label,depth_cm,kind,age,error\nA,1,calendar,-70,2\n",
                        collected=2025)
    assert inspect_core(folder, year=2025)[1] == []
    (problem,) = inspect_core(folder, year=2024)[1]
    assert problem.column == "core.collected" and "future" in problem.message


@pytest.mark.parametrize(
    "kind, age, ok",
    [
        ("radiocarbon", -900, True),  # mildly post-bomb: allowed
        ("radiocarbon", -5000, True),  # bomb peak (F14C ~1.9): allowed, needs a post-bomb curve
        ("radiocarbon", -10001, False),
        ("radiocarbon", 54000, True),
        ("radiocarbon", 56000, False),
        ("calendar", -64, True),  # core top of a 2010 core is -60 cal BP; 5 yr slack
        ("calendar", -66, False),
        ("calendar", 120000, True),
        ("Calendar", 50, True),  # kind is read case-insensitively
    ],
)
def test_age_ranges(tmp_path, kind, age, ok):
    folder = write_core(tmp_path / "c", "depth_cm,uk37\n1,0.4\n", f"label,depth_cm,kind,age,error\nA,1,{kind},{age},20\n")
    core, problems = inspect_core(folder)
    assert (core is not None) == ok, problems
    if not ok:
        assert problems[0].column == "age" and problems[0].row == 2


def test_missing_markers_and_dates_below_the_deepest_sample(tmp_path):
    folder = write_core(
        tmp_path / "c", "depth_cm,uk37,sample_id\n1,NA,S1\n2,nan,S2\n",
        "label,depth_cm,kind,age,error\nDEEP,500,radiocarbon,9000,50\n",
    )
    core = load_core(folder)
    assert core.samples["uk37"].isna().all()
    assert core.samples["sample_id"].tolist() == ["S1", "S2"]
    assert core.dates["depth_cm"].tolist() == [500.0]


def test_a_core_needs_proxies_or_counts(tmp_path):
    dates = "label,depth_cm,kind,age,error\nA,1,radiocarbon,900,30\n"
    folder = write_core(tmp_path / "no_proxies", "depth_cm,thickness_cm\n1,1\n", dates)
    (problem,) = inspect_core(folder)[1]
    assert "no proxy column" in problem.message
    folder = write_core(tmp_path / "counts_only", "depth_cm,thickness_cm\n1,1\n", dates,
                        counts="depth_cm,taxon_a,taxon_b\n1,3,0\n")
    assert load_core(folder).taxa == ("taxon_a", "taxon_b")


def test_section_column_without_sections_and_sections_without_column(tmp_path):
    dates = "label,depth_cm,kind,age,error\nA,1,radiocarbon,900,30\n"
    folder = write_core(tmp_path / "a", "section,depth_cm,uk37\nA,1,0.4\n", dates)
    (problem,) = inspect_core(folder)[1]
    assert problem.column == "section"
    folder = write_core(tmp_path / "b", "depth_cm,uk37\n1,0.4\n", dates,
                        extra='[[sections]]\nname = "A"\ntop = 0\n')
    problems = inspect_core(folder)[1]
    assert {Path(p.file).name for p in problems} == {"samples.csv", "dates.csv"}
    assert all(p.column == "section" for p in problems)


def test_not_a_folder_and_missing_core_toml(tmp_path):
    (problem,) = inspect_core(tmp_path / "absent")[1]
    assert "not a folder" in problem.message
    (problem,) = inspect_core(tmp_path)[1]
    assert problem.file.endswith("core.toml") and "not found" in problem.message


@pytest.mark.parametrize("folder", BROKEN, ids=[p.name for p in BROKEN])
def test_broken_corpus_problem_is_found_and_inputs_untouched(folder):
    expected = tomllib.loads((folder / "expected.toml").read_text())
    if "check" in expected:
        pytest.skip("needs a run config: covered in test_config.py and test_check_cli.py")
    before = hashes(folder)
    core, problems = inspect_core(folder, year=2026)
    assert core is None
    assert any(
        Path(p.file).name == expected["file"]
        and p.row == expected.get("row")
        and (p.column == expected.get("column") or "column" not in expected)
        for p in problems
    ), [str(p) for p in problems]
    assert hashes(folder) == before


def test_good_core_folder_is_left_byte_identical(tmp_path):
    copy = shutil.copytree(GOOD, tmp_path / "good")
    before = hashes(copy)
    load_core(copy)
    assert hashes(copy) == before
    assert sorted(p.name for p in copy.iterdir()) == sorted(before)
