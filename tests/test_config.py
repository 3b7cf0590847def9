"""Run config: [run], [curves], core-folder globs, raw stage sections, stage settings."""

import shutil
import sys
import types
from pathlib import Path

import pytest

from pipelines import config as config_module
from pipelines.config import RunConfig, load_run_config, stage_settings
from pipelines.config_problems import check_run_config
from proxies.problems import InputError, Problem

DATA = Path(__file__).parent / "data"
# a straight invented curve covering the good core's dates (0-30 000 cal BP)
CURVE = "".join(f"{cal}, {cal * 0.9 + 50:.0f}, 15, 0, 1\n" for cal in range(0, 30001, 50))


def make_project(tmp_path: Path, run: str = 'seed = 7\ncores = ["cores/*"]', extra: str = "") -> Path:
    (tmp_path / "cores").mkdir()
    shutil.copytree(DATA / "good_core", tmp_path / "cores" / "b_core")
    shutil.copytree(DATA / "good_core", tmp_path / "cores" / "a_core")
    (tmp_path / "cores" / "a_core" / "core.toml").write_text(
        (tmp_path / "cores" / "a_core" / "core.toml").read_text().replace('"GOOD-1"', '"GOOD-2"')
    )
    (tmp_path / "cores" / "README.txt").write_text("not a core")  # files are not core folders
    (tmp_path / "curves").mkdir()
    (tmp_path / "curves" / "atm.14c").write_text(CURVE)
    path = tmp_path / "run.toml"
    path.write_text(f'[run]\n{run}\n\n[curves]\natmosphere = "curves/atm.14c"\n{extra}')
    return path


def problems_of(path) -> list[Problem]:
    with pytest.raises(InputError) as caught:
        load_run_config(path)
    return caught.value.problems


def test_good_config_resolves_folders_curves_and_sections(tmp_path):
    path = make_project(tmp_path, extra="[report]\ntitle = 'x'\n[training.modern]\nfile = 'x.csv'\n")
    config = load_run_config(path)
    assert isinstance(config, RunConfig)
    assert config.seed == 7 and config.ensemble == 1000  # ensemble default
    assert [p.name for p in config.core_folders] == ["a_core", "b_core"]  # sorted, folders only
    assert all(p.is_absolute() for p in config.core_folders)
    assert config.curves == {"atmosphere": (tmp_path / "curves" / "atm.14c").resolve()}
    assert config.sections["report"] == {"title": "x"}
    assert config.sections["training"] == {"modern": {"file": "x.csv"}}
    assert config.sections["events"] == {}
    assert config.resolve("x.csv") == (tmp_path / "x.csv").resolve()
    # the training section names no target and a missing file: check reads it as the run does
    assert {p.column or Path(p.file).name for p in check_run_config(path)} <= {"target", "x.csv"}
    assert check_run_config(path)


def test_globs_are_relative_to_the_config_not_the_working_folder(tmp_path, monkeypatch):
    path = make_project(tmp_path, run='seed = 1\ncores = ["cores/a_core", "cores/*_core"]')
    monkeypatch.chdir(tmp_path / "cores")
    config = load_run_config(path)
    assert [p.name for p in config.core_folders] == ["a_core", "b_core"]  # de-duplicated


@pytest.mark.parametrize(
    "run, column, words",
    [
        ('seed = -1\ncores = ["cores/*"]', "run.seed", "must be >= 0"),
        ('seed = true\ncores = ["cores/*"]', "run.seed", "must be an integer"),
        ('seed = 1.5\ncores = ["cores/*"]', "run.seed", "must be an integer"),
        ('cores = ["cores/*"]', "run.seed", "missing"),
        ('seed = 1\nensemble = 5\ncores = ["cores/*"]', "run.ensemble", "must be >= 10 and <= 100000"),
        ('seed = 1\nensemble = 100001\ncores = ["cores/*"]', "run.ensemble", "must be >= 10 and <= 100000"),
        ('seed = 1\ncores = [1]', "run.cores", "must be a list of names"),
        ('seed = 1\ncores = ["nothing/*"]', "run.cores", "matches no folder"),
        ('seed = 1\ncores = ["cores/README.txt"]', "run.cores", "matches no folder"),
        ("seed = 1", "run.cores", "missing"),
        ('seed = 1\ncores = ["cores/*"]\nworkers = 4', "run.workers", "unknown key"),
    ],
)
def test_run_section_problems(tmp_path, run, column, words):
    path = make_project(tmp_path, run=run)
    problems = problems_of(path)
    assert any(p.column == column and words in p.message for p in problems), [str(p) for p in problems]
    assert all(p.file == str(path) for p in problems)


def test_unknown_section_missing_curve_file_and_bad_toml(tmp_path):
    path = make_project(tmp_path, extra='[reconstuction]\nstep = 5\n')
    path.write_text(path.read_text().replace("curves/atm.14c", "curves/absent.14c"))
    columns = {p.column for p in problems_of(path)}
    assert columns == {"reconstuction", "curves.atmosphere"}
    path.write_text("[run\nseed = 1\n")
    (problem,) = problems_of(path)
    assert problem.row == 1 and "invalid TOML" in problem.message


def test_check_includes_core_problems_curve_names_and_duplicate_ids(tmp_path):
    path = make_project(tmp_path)
    dates = tmp_path / "cores" / "b_core" / "dates.csv"
    dates.write_text(dates.read_text().replace("LX-1003,B,20.0,2,radiocarbon,2920,40,atmosphere",
                                               "LX-1003,B,20.0,2,radiocarbon,2920,40,marine"))
    toml = tmp_path / "cores" / "a_core" / "core.toml"
    toml.write_text(toml.read_text().replace('"GOOD-2"', '"GOOD-1"'))
    problems = check_run_config(path, year=2026)
    found = {(Path(p.file).name, p.row, p.column) for p in problems}
    assert found == {("dates.csv", 5, "curve"), ("core.toml", None, "core.id")}


def test_radiocarbon_dates_need_a_curve(tmp_path):
    path = make_project(tmp_path)
    path.write_text(path.read_text().split("[curves]")[0])
    for name in ("a_core", "b_core"):
        dates = tmp_path / "cores" / name / "dates.csv"
        dates.write_text(dates.read_text().replace(",atmosphere,", ",,"))
    problems = check_run_config(path)
    assert problems and all(p.column == "curve" and "no [curves]" in p.message for p in problems)
    # the five radiocarbon rows of each core; calendar dates need no curve
    assert sorted(p.row for p in problems) == sorted([3, 4, 5, 6, 7] * 2)


def test_stage_settings_resolves_lazily_and_passes_where(tmp_path, monkeypatch):
    calls = []

    class FakeSettings:
        @classmethod
        def from_mapping(cls, mapping, where):
            calls.append((mapping, where))
            if "bad" in mapping:
                raise InputError(Problem(where, "bad key", "remove it", column="bad"))
            return cls()

    module = types.ModuleType("fake_stage_module")
    module.FakeSettings = FakeSettings
    monkeypatch.setitem(sys.modules, "fake_stage_module", module)
    monkeypatch.setitem(config_module.STAGE_SETTINGS, "events", "fake_stage_module:FakeSettings")
    path = make_project(tmp_path, extra="[events]\nwindow = 3\n")
    config = load_run_config(path)
    assert isinstance(stage_settings(config, "events"), FakeSettings)
    assert calls[-1] == ({"window": 3}, f"{config.path} [events]")
    with pytest.raises(ValueError):
        stage_settings(config, "nonsense")
    path.write_text(path.read_text().replace("window = 3", "bad = 1"))
    problems = check_run_config(path)
    assert [(p.column, p.file) for p in problems] == [("bad", f"{path.resolve()} [events]")]


def test_check_reads_training_and_instrumental_sections_and_files(tmp_path):
    """check validates [training.*], [instrumental.*] and their files with the declared keys,
    and a calibration that names a missing series."""
    extra = ("[training.modern]\nfile = 'lakes.csv'\ntarget = 'temp'\ncomponets = 2\n"
             "[instrumental.station]\nfile = 'station.csv'\nvalue_column = 'air'\n"
             "[calibration.bsi]\nmethod = 'overlap'\nseries = 'stations'\n")
    path = make_project(tmp_path, extra=extra)
    (tmp_path / "station.csv").write_text("year_ce,air\n1900,1.0\n1901,warm\n")
    problems = check_run_config(path)
    located = {(p.file.rsplit("/", 1)[-1], p.row, p.column) for p in problems}
    assert ("run.toml [training.modern]", None, "componets") in located
    assert ("station.csv", 3, "air") in located
    assert ("run.toml [calibration.bsi]", None, "series") in located
    assert any("did you mean 'components'" in p.fix for p in problems)
