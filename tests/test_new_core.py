"""``downcore new-core``: a commented template that ``downcore check`` refuses precisely while
unfilled and accepts once filled; its keys are exactly the keys core.toml accepts."""

from __future__ import annotations

import re
import tomllib

import pytest
from click.testing import CliRunner

from pipelines.cli import main
from pipelines.coretemplate import core_template
from pipelines.ingest import load_core
from proxies.cores.core_file import BLOCK_KEYS, CORE_KEYS, FILE_KEYS, TOP_LEVEL_KEYS


def _new(tmp_path, *options):
    folder = tmp_path / "LAKE-9"
    result = CliRunner().invoke(main, ["new-core", str(folder), "--id", "LAKE-9", *options])
    assert result.exit_code == 0, result.output
    return folder


def _check(folder):
    return CliRunner().invoke(main, ["check", str(folder)])


def _fill_core_toml(folder):
    text = (folder / "core.toml").read_text()
    for key, value in (("latitude", "60.5"), ("longitude", "12.25"), ("collected", "2019")):
        text = re.sub(rf"^# {key} = \S+", f"{key} = {value}", text, flags=re.M)
    (folder / "core.toml").write_text(text)


def test_unfilled_template_gives_one_problem_per_missing_key(tmp_path):
    folder = _new(tmp_path, "--proxy", "uk37")
    assert sorted(p.name for p in folder.iterdir()) == ["core.toml", "dates.csv", "samples.csv"]
    result = _check(folder)
    assert result.exit_code == 1
    for key in ("latitude", "longitude", "collected"):
        assert f"column 'core.{key}': required key '{key}' is missing" in result.output


def test_filled_core_toml_then_empty_tables_are_named(tmp_path):
    folder = _new(tmp_path, "--proxy", "uk37")
    _fill_core_toml(folder)
    result = _check(folder)
    assert result.exit_code == 1
    assert "samples.csv: the table has a header but no data rows" in result.output
    assert "dates.csv: the table has a header but no data rows" in result.output


def test_filled_template_passes_check_and_loads(tmp_path):
    folder = _new(tmp_path, "--proxy", "uk37", "--proxy", "tex86", "--site", "an invented tarn")
    _fill_core_toml(folder)
    with open(folder / "samples.csv", "a") as samples:
        samples.write("12.5,1.0,0.61,0.01,0.45,0.02\n30.0,,0.58,,0.47,\n")
    with open(folder / "dates.csv", "a") as dates:  # optional columns left empty, or filled
        dates.write("L-1,20.0,radiocarbon,1530,35,,,,,\nL-2,45.5,calendar,2100,40,1.0,,,,yes\n")
    result = _check(folder)
    assert result.exit_code == 0, result.output
    core = load_core(folder)
    assert core.id == "LAKE-9" and core.latitude == 60.5 and core.collected_ce == 2019
    assert core.site == "an invented tarn" and list(core.dates["label"]) == ["L-1", "L-2"]


def test_options_fill_the_required_values_and_depth_unit_names_the_columns(tmp_path):
    folder = _new(tmp_path, "--latitude", "-12.5", "--longitude", "130", "--collected", "2021",
                  "--depth-unit", "mm", "--archive", "marine")
    core = tomllib.loads((folder / "core.toml").read_text())["core"]
    assert (core["latitude"], core["longitude"], core["collected"], core["archive"]) == (-12.5, 130.0, 2021, "marine")
    assert (folder / "samples.csv").read_text().startswith("depth_mm,thickness_mm")
    assert (folder / "dates.csv").read_text().split(",")[1] == "depth_mm"


def _template_keys_by_table(text: str) -> dict[str, list[str]]:
    """The keys of the template, commented or not, under each [table] / [[block]] header."""
    found: dict[str, list[str]] = {}
    table = None
    for line in text.splitlines():
        header = re.match(r"^(?:# )?\[\[?([a-z_]+)\]\]?", line)
        key = re.match(r"^(?:# )?([a-z][a-z0-9_]*) = ", line)
        if header:
            table = header.group(1)
            found.setdefault(table, [])
        elif key:
            assert table is not None, f"key outside a table: {line!r}"
            found[table].append(key.group(1))
    return found


def test_every_accepted_key_is_in_the_template_and_no_other():
    """The template explains exactly the keys core.toml accepts (proxies/cores/core_file.py:
    CORE_KEYS, FILE_KEYS, BLOCK_KEYS), each under its own table, in the declared order (a key
    added there must be added to pipelines/coretemplate.py too)."""
    found = _template_keys_by_table(core_template("X-1")["core.toml"])
    assert list(found) == list(TOP_LEVEL_KEYS)
    assert found["core"] == list(CORE_KEYS) and found["files"] == list(FILE_KEYS)
    for block, keys in BLOCK_KEYS.items():
        assert found[block] == list(keys), block


@pytest.mark.parametrize("args, words", [
    (["--id", "bad id"], "not safe as a folder name"),
    (["--id", "OK-1", "--proxy", "depth_cm"], "proxy column"),
])
def test_bad_options_are_refused(tmp_path, args, words):
    result = CliRunner().invoke(main, ["new-core", str(tmp_path / "c"), *args])
    assert result.exit_code == 2 and words in result.output
    assert not (tmp_path / "c").exists()


def test_an_existing_folder_with_content_is_never_overwritten(tmp_path):
    (tmp_path / "c").mkdir()
    (tmp_path / "c" / "core.toml").write_text("mine")
    result = CliRunner().invoke(main, ["new-core", str(tmp_path / "c"), "--id", "OK-1"])
    assert result.exit_code == 2 and "not an empty folder" in result.output
    assert (tmp_path / "c" / "core.toml").read_text() == "mine"
