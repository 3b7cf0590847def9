"""Settings of the event-detection stage: the ``[events]`` section of the run config."""

from __future__ import annotations

from dataclasses import dataclass

from proxies.problems import Problem
from proxies.settings_checks import settings_from_mapping

__all__ = ["EventSettings"]

_LIMITS = {
    # key: (type, exclusive lower bound (None: >= 0), upper bound or None, example)
    "penalty_factor": (float, 0.0, None, "1.0"),
    "alpha": (float, 0.0, 0.5, "0.05"),
    "max_excursion_yr": (float, 0.0, None, "600"),
    "cluster_gap_yr": (float, 0.0, None, "300"),
    "background_yr": (float, None, None, "2000"),
    "min_probability": (float, 0.0, 1.0, "0.05"),
    "n_surrogates": (int, 19, None, "200"),
    "ramp_window_points": (int, 3, None, "24"),
}


@dataclass(frozen=True)
class EventSettings:
    """How abrupt events are detected on every ensemble member.

    Attributes
    ----------
    enabled : bool
        Run detection at all. Default true.
    penalty_factor : float
        Multiplies the BIC penalty ``2 ln T`` of the change-point search; larger finds
        fewer change points. Default 1.0.
    background_yr : float
        Width of the running median removed from each member before the change-point
        search, so that slow climate change is not cut into steps [yr]; 0 removes a
        straight line instead. The red-noise surrogates get the same treatment. Changes
        slower than about half this width are not sought. Default 2000.
    max_excursion_yr : float
        A departure followed by a return whose middle segment lasts at most this long is
        one event of kind ``excursion``; other change points are events of kind ``shift``
        [yr]. Default 600: centennial-scale abrupt events (a few hundred years); a longer
        departure shows as two shifts. Excursions are sought by a scan over every block of
        two points up to this length (:mod:`proxies.events.scan`).
    alpha : float
        Significance level against AR(1) red noise: of each member's whole-record search, of
        the ensemble-level test of an event (on the ensemble-median series) and of the local
        member tests behind an established event's probability. Default 0.05.
    n_surrogates : int
        AR(1) surrogate series of the calibrated null distribution. Default 200.
    cluster_gap_yr : float
        Member detections whose change times lie closer than this belong to one event [yr].
        Default 300.
    min_probability : float
        Events whose whole-record search found them (significantly) in a smaller share of the
        members are not reported. Default 0.05.
    ramp_window_points : int
        Largest window (grid points) searched by the ramp fit around a change (half before,
        half after it); bounds how far onset and end can lie from the change. Default 24.
    variables : tuple of str or None
        Variables to analyse; ``None`` (default) all.
    """

    enabled: bool = True
    penalty_factor: float = 1.0
    background_yr: float = 2000.0
    max_excursion_yr: float = 600.0
    alpha: float = 0.05
    n_surrogates: int = 200
    cluster_gap_yr: float = 300.0
    min_probability: float = 0.05
    ramp_window_points: int = 24
    variables: tuple[str, ...] | None = None

    @classmethod
    def from_mapping(cls, mapping: dict | None, where: str = "[events]") -> "EventSettings":
        """Validate an ``[events]`` TOML section and build the settings.

        Raises
        ------
        proxies.problems.InputError
            Naming every unknown key, wrong type or out-of-range value (``column`` = key).
        """
        return settings_from_mapping(cls, mapping, where, lambda key, value: _check(key, value, where))


def _check(key: str, value, where: str):
    """The value of one ``[events]`` key, converted, or the :class:`Problem` with it."""
    if key == "enabled":
        if not isinstance(value, bool):
            return Problem(where, f"'{key}' must be true or false, got {value!r}", "write true or false", column=key)
        return value
    if key == "variables":
        if not (isinstance(value, list) and all(isinstance(v, str) for v in value)):
            return Problem(where, "'variables' must be a list of variable names",
                           'e.g. variables = ["temperature"]', column=key)
        return tuple(value)
    kind, lower, upper, example = _LIMITS[key]
    ok_type = (isinstance(value, int) if kind is int else isinstance(value, (int, float)))
    if isinstance(value, bool) or not ok_type:
        return Problem(where, f"'{key}' must be a{'n integer' if kind is int else ' number'}, got {value!r}",
                       f"e.g. {key} = {example}", column=key)
    value = kind(value)
    low_ok = value >= 0 if lower is None else value > lower
    if not low_ok or (upper is not None and value > upper):
        bound = (">= 0" if lower is None else f"> {lower}") + (f" and <= {upper}" if upper is not None else "")
        return Problem(where, f"'{key}' = {value} is out of range; it must be {bound}",
                       f"e.g. {key} = {example}", column=key)
    return value
