"""DepthScale: section -> composite depth, composite <-> event-free depth, hiatuses.

Expected values are hand-computed from the definitions in proxies/cores/depth.py and
cross-checked against a brute-force enumeration on a fine depth grid.
"""

import numpy as np
import pytest

from proxies.cores import DepthScale, EventLayer, Section

LAYERS = (EventLayer(20.0, 25.0, "slump"), EventLayer(10.0, 12.0, "turbidite"))  # unsorted on purpose


def scale(**kwargs) -> DepthScale:
    return DepthScale(event_layers=LAYERS, **kwargs)


def test_event_free_depth_hand_values():
    """Above, inside, between and below two layers (2 cm and 5 cm cut), by hand."""
    got = scale().event_free_depth([0.0, 5.0, 10.0, 11.0, 12.0, 15.0, 22.0, 25.0, 30.0])
    np.testing.assert_allclose(got, [0.0, 5.0, 10.0, 10.0, 10.0, 13.0, 18.0, 18.0, 23.0])


def test_event_free_depth_matches_brute_force_enumeration():
    """Event-free depth = summed length of grid cells not inside any layer (brute force)."""
    step = 0.001
    centres = np.arange(step / 2, 40.0, step)
    kept = ~((centres > 10) & (centres < 12) | (centres > 20) & (centres < 25))
    brute = np.concatenate([[0.0], np.cumsum(kept) * step])
    depths = np.arange(0.0, 40.0 + step / 2, step)
    np.testing.assert_allclose(scale().event_free_depth(depths), brute, atol=2 * step)


def test_inverse_round_trips_outside_layers_and_maps_layer_point_to_top():
    depth_scale = scale()
    outside = np.array([0.0, 3.3, 9.99, 12.01, 19.5, 25.0001, 31.0, 100.0])
    np.testing.assert_allclose(
        depth_scale.composite_from_event_free(depth_scale.event_free_depth(outside)), outside
    )
    # the event-free point of a layer stands for the whole layer; the inverse gives its top
    np.testing.assert_allclose(depth_scale.composite_from_event_free([10.0, 18.0]), [10.0, 20.0])
    # just below it, the composite depth is below the layer bottom
    np.testing.assert_allclose(depth_scale.composite_from_event_free([10.5]), [12.5])


def test_event_free_depth_is_monotone_and_cuts_total_thickness():
    depth_scale = scale()
    depths = np.linspace(0, 50, 2001)
    free = depth_scale.event_free_depth(depths)
    assert np.all(np.diff(free) >= 0)
    assert depth_scale.total_cut_cm == pytest.approx(7.0)
    assert free[-1] == pytest.approx(50.0 - 7.0)


def test_in_event_layer_is_strictly_inside():
    mask = scale().in_event_layer([9.9, 10.0, 11.0, 12.0, 22.0, 25.0])
    assert mask.tolist() == [False, False, True, False, True, False]


def test_hiatuses_are_carried_to_the_event_free_scale():
    depth_scale = scale(hiatuses_cm=(30.0, 5.0, 12.0))
    assert depth_scale.hiatuses_cm == (5.0, 12.0, 30.0)
    assert depth_scale.hiatuses_event_free_cm == pytest.approx((5.0, 10.0, 23.0))


def test_composite_depth_from_sections():
    depth_scale = DepthScale(sections=(Section("A", 0.0), Section("B", 95.0)))
    got = depth_scale.composite_depth(["A", "B", "B"], [2.5, 0.0, 27.5])
    np.testing.assert_allclose(got, [2.5, 95.0, 122.5])
    with pytest.raises(KeyError):
        depth_scale.composite_depth(["C"], [1.0])


@pytest.mark.parametrize(
    "kwargs",
    [
        {"event_layers": (EventLayer(5.0, 4.0),)},
        {"event_layers": (EventLayer(5.0, 5.0),)},
        {"event_layers": (EventLayer(1.0, 5.0), EventLayer(4.0, 8.0))},
        {"event_layers": (EventLayer(1.0, 5.0),), "hiatuses_cm": (3.0,)},
        {"sections": (Section("A", 0.0), Section("A", 10.0))},
    ],
    ids=["inverted", "zero-thickness", "overlap", "hiatus-inside", "duplicate-section"],
)
def test_inconsistent_scales_are_refused(kwargs):
    with pytest.raises(ValueError):
        DepthScale(**kwargs)


def test_touching_layers_and_hiatus_at_layer_edge_are_fine():
    depth_scale = DepthScale(event_layers=(EventLayer(1.0, 5.0), EventLayer(5.0, 8.0)), hiatuses_cm=(8.0,))
    assert depth_scale.event_free_depth([10.0]) == pytest.approx([3.0])
    assert depth_scale.hiatuses_event_free_cm == pytest.approx((1.0,))
