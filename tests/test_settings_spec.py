"""The declarative settings mechanism and the README key tables generated from it."""

from __future__ import annotations

from pathlib import Path

import pytest

from pipelines.settings_doc import SECTIONS, key_table, refresh_readme
from proxies.chronology.settings import ChronologySettings
from proxies.events.settings import EventSettings
from proxies.problems import InputError
from proxies.reconstruction.settings import ReconstructionSettings

README = Path(__file__).resolve().parents[1] / "README.md"


def test_readme_key_tables_are_generated_from_the_declarations():
    text = README.read_text(encoding="utf-8")
    for section in SECTIONS:
        assert f"<!-- keys:{section} -->\n{key_table(section)}<!-- /keys -->" in text, (
            f"README's [{section}] table is stale: run python -m pipelines.settings_doc README.md")
    assert refresh_readme(text) == text


def test_unknown_key_gets_a_did_you_mean():
    with pytest.raises(InputError) as err:
        ChronologySettings.from_mapping({"node_spacing": 2, "outlier_prior": 0.7}, "run.toml [chronology]")
    problems = err.value.problems
    assert [p.column for p in problems] == ["node_spacing", "outlier_prior"]   # section order
    assert "did you mean 'node_spacing_cm'" in problems[0].fix
    assert ">= 0 and <= 0.5" in problems[1].message and problems[1].file == "run.toml [chronology]"


@pytest.mark.parametrize("cls, key, value", [
    (ChronologySettings, "error_multiplier_prior", [3.0]),        # not a pair
    (ChronologySettings, "error_multiplier_prior", [3.0, -1.0]),  # out of range
    (ChronologySettings, "grid_step_yr", "fast"),                 # neither auto nor a number
    (ChronologySettings, "max_nodes", 2.5),                       # not an integer
    (EventSettings, "alpha", 0.0),                                # open lower bound
    (EventSettings, "variables", "temperature"),                  # not a list
    (ReconstructionSettings, "binning", "bins"),                  # not a choice
    (ReconstructionSettings, "min_member_share", True),           # a boolean is no number
])
def test_bad_values_are_refused_with_the_key_named(cls, key, value):
    with pytest.raises(InputError) as err:
        cls.from_mapping({key: value}, "run.toml")
    assert err.value.problems[0].column == key


def test_values_are_converted_and_defaults_kept():
    s = ChronologySettings.from_mapping({"grid_step_yr": "auto", "error_multiplier_prior": [2, 5],
                                         "max_nodes": 40})
    assert s.grid_step_yr is None and s.error_multiplier_prior == (2.0, 5.0) and s.max_nodes == 40
    assert s.node_spacing_cm == ChronologySettings().node_spacing_cm
    assert EventSettings.from_mapping({"background_yr": 0}).background_yr == 0.0   # inclusive zero
    assert ReconstructionSettings.from_mapping({"binning": "bin"}).binning == "bin"
    assert "did you mean 'bin'" in _fix(ReconstructionSettings, {"binning": "bins"})


def _fix(cls, mapping):
    with pytest.raises(InputError) as err:
        cls.from_mapping(mapping)
    return err.value.problems[0].fix
