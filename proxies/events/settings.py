"""Settings of the event-detection stage: the ``[events]`` section of the run config.

Every key is declared once, with its type, bounds, default and meaning
(:mod:`proxies.settings_spec`); the README's key table is checked against these declarations.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

from proxies.settings_spec import DeclaredSection, setting

__all__ = ["EventSettings"]


@dataclass(frozen=True)
class EventSettings(DeclaredSection):
    """How abrupt events are detected on every ensemble member (one attribute per key).

    ``background_yr``: width of the running median removed from each member before the
    excursion search, so that slow climate change is not taken for an excursion; 0 removes a
    straight line instead; the red-noise surrogates get the same treatment. Shifts are sought
    on the series itself, comparing the ``background_yr / 2`` before each point with the
    ``background_yr / 2`` after it (:mod:`proxies.events.mosum`); changes slower than that are
    not sought. ``max_excursion_yr``: a departure followed by a
    return whose middle segment lasts at most this long is one event of kind ``excursion``
    (sought by a scan over every block of two points up to this length,
    :mod:`proxies.events.scan`); other change points are events of kind ``shift``. ``alpha``
    is the level of each member's whole-record search, of the ensemble-level test of an event
    (on the ensemble-median series) and of the local member tests behind an established
    event's probability.
    """

    SECTION: ClassVar[str] = "events"
    RETIRED_KEYS: ClassVar[dict[str, str]] = {
        "background_keeps_changes": "delete it: lasting shifts are now sought on the series itself "
                                    "(moving-sum two-sample statistic over background_yr / 2 on "
                                    "each side), so the background no longer swallows them"}

    enabled: bool = setting(True, "run detection at all")
    edge_support_points: int = setting(5, "grid points of record an event needs beyond it on each "
                                       "side (a shift on both sides of its change, an excursion "
                                       "before and after it); nearer a record's end nothing is sought",
                                       low=1)
    background_yr: float = setting(2000.0, "width of the running-median background removed before "
                                   "the excursion search, and twice the window on each side of "
                                   "a shift [yr]; 0 removes a straight line (shift windows: a "
                                   "quarter of the record)", low=0.0)
    max_excursion_yr: float = setting(600.0, "longest departure-and-return counted as one "
                                      "excursion [yr]", low=0.0, low_open=True)
    alpha: float = setting(0.05, "significance level against AR(1) red noise", low=0.0, high=0.5,
                           low_open=True)
    n_surrogates: int = setting(200, "AR(1) surrogate series of the calibrated null distribution",
                                low=19, low_open=True)
    cluster_gap_yr: float = setting(300.0, "member detections closer than this belong to one "
                                    "event [yr]", low=0.0, low_open=True)
    min_probability: float = setting(0.05, "events found (significantly) in a smaller share of the "
                                     "members are not reported", low=0.0, high=1.0, low_open=True)
    ramp_window_points: int = setting(24, "largest window (grid points) searched by the ramp fit "
                                      "around a change", low=3, low_open=True)
    lead_lag_window_yr: float = setting(1000.0, "events of two cores (same variable, kind and direction) "
                                        "whose onset medians are at most this far apart are taken "
                                        "as one event for lead/lag [yr]", low=0.0, low_open=True)
    lead_lag_group: tuple[str, ...] | None = setting(None, "variables whose events are taken as one "
                                                     "event across cores for lead/lag (unset: each "
                                                     "variable on its own)", kind="list[str]",
                                                     example='["air_temperature", "sst"]')
    variables: tuple[str, ...] | None = setting(None, "variables to analyse (unset: all)",
                                                kind="list[str]", example='["temperature"]')
