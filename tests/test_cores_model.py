"""The Core data model: derived properties and immutability."""

import dataclasses

import numpy as np
import pandas as pd
import pytest

from proxies.cores import Core, DepthScale, EventLayer, Section


def make_core(**changes) -> Core:
    samples = pd.DataFrame(
        {
            "section": ["A", "A"],
            "depth_cm": [1.0, 2.0],
            "section_depth_cm": [1.0, 2.0],
            "thickness_cm": [1.0, 1.0],
            "uk37": [0.4, 0.5],
            "uk37_error": [0.01, 0.01],
            "notes": pd.Series([None, "x"], dtype=object),
            "mgca_mmol_mol": [2.1, 2.2],
            "source_row": np.array([2, 3]),
        }
    )
    counts = pd.DataFrame({"depth_cm": [1.0], "taxon_a": [3.0], "taxon_b": [0.0], "source_row": [2]})
    fields = dict(
        id="LAKE-1", archive="lake", latitude=61.0, longitude=14.0, collected_ce=2018, site="",
        top_age_error=None, samples=samples, dates=pd.DataFrame(), counts=counts,
        sections=(Section("A", 0.0),), event_layers=(EventLayer(1.2, 1.5, "tephra"),),
        hiatuses_cm=(1.8,), folder="cores/LAKE-1",
    )
    fields.update(changes)
    return Core(**fields)


def test_top_age_is_1950_minus_collection_year():
    """cal BP counts years before 1950 CE (DEVELOPERS.md conventions)."""
    assert make_core().top_age_cal_bp == -68.0
    assert make_core(collected_ce=1950).top_age_cal_bp == 0.0


def test_proxy_columns_are_numeric_non_depth_non_error_columns_in_file_order():
    core = make_core()
    assert core.proxy_columns == ("uk37", "mgca_mmol_mol")
    assert core.error_column("uk37") == "uk37_error"
    assert core.error_column("mgca_mmol_mol") is None


def test_taxa_are_count_columns_and_empty_without_counts():
    assert make_core().taxa == ("taxon_a", "taxon_b")
    assert make_core(counts=None).taxa == ()


def test_depth_scale_uses_layers_and_hiatuses():
    scale = make_core().depth_scale
    assert isinstance(scale, DepthScale)
    assert scale.event_free_depth([2.0]) == pytest.approx([1.7])
    assert scale.hiatuses_event_free_cm == pytest.approx((1.5,))


def test_core_is_frozen():
    core = make_core()
    with pytest.raises(dataclasses.FrozenInstanceError):
        core.id = "OTHER"
    assert EventLayer(1.0, 3.5).thickness_cm == 2.5
