"""Settings of the chronology stage: the ``[chronology]`` section of the run config."""

from __future__ import annotations

from dataclasses import dataclass

from proxies.problems import Problem
from proxies.settings_checks import settings_from_mapping

__all__ = ["ChronologySettings", "MODELS", "JOINS"]

#: age-depth models by name
MODELS = ("accumulation", "interpolation")
#: curves joining dates in the interpolation model
JOINS = ("linear", "smooth")

_NUMBERS = {
    # key: (type, exclusive lower bound, inclusive upper bound or None, example)
    "node_spacing_cm": (float, 0.0, None, "5"),
    "max_nodes": (int, 2, None, "300"),
    "calibration_step_yr": (float, 0.0, 100.0, "1"),
    "hiatus_gap_yr": (float, 0.0, None, "5000"),
    "outlier_prior": (float, -1e-12, 0.5, "0.05"),
    "t_a": (float, 0.0, None, "3"),
    "t_b": (float, 0.0, None, "4"),
    "top_age_error_yr": (float, 0.0, None, "5"),
    "output_step_cm": (float, 0.0, None, "1"),
}
_AUTO_NUMBERS = {"grid_step_yr": (0.0, "10"), "mean_rate_yr_cm": (0.0, "20")}
_LISTS = {"rate_multipliers": "[0.5, 0.71, 1.0, 1.41, 2.0]", "rate_shapes": "[1.5, 3, 6, 12, 24, 48]"}
_BOOLS = ("student_t", "core_top")
_CHOICES = {"model": MODELS, "join": JOINS}


@dataclass(frozen=True)
class ChronologySettings:
    """How dates are calibrated and age-depth models built.

    Attributes
    ----------
    model : str
        ``"accumulation"`` (default; Bayesian accumulation model solved exactly) or
        ``"interpolation"`` (Monte Carlo interpolation with monotonic rejection).
    join : str
        Interpolation model only: ``"linear"`` (default) or ``"smooth"`` (monotone cubic).
    node_spacing_cm : float
        Accumulation model: spacing of the regular depth nodes [cm, event-free]; every date
        depth is a node as well. Default 5.
    max_nodes : int
        The spacing is widened so that the regular nodes stay below this number (long
        cores). Default 300.
    grid_step_yr : float or None
        Calendar grid step of the accumulation model [yr]; ``None`` ("auto", default): the
        age span / 4000 rounded up to 1, 2, 5, 10, 20, 50 or 100 yr.
    calibration_step_yr : float
        Step of the regular grid curves are interpolated onto for calibration [yr].
        Default 1.
    mean_rate_yr_cm : float or None
        Centre of the mean accumulation-rate grid [yr/cm]; ``None`` ("auto", default): the
        Theil-Sen slope of the calibrated date medians against event-free depth.
    rate_multipliers : tuple of float
        Mean rates tried = centre x these. Default (0.5, 0.71, 1.0, 1.41, 2.0).
    rate_shapes : tuple of float
        Gamma shapes of the rate over one ``node_spacing_cm`` interval tried (larger = more
        regular accumulation; the sd of the rate is mean / sqrt(shape)).
        Default (1.5, 3, 6, 12, 24, 48): from very irregular to very regular, the evidence
        chooses.
    hiatus_gap_yr : float
        Mean of the exponential gap prior at a hiatus [yr]. Default 5000.
    outlier_prior : float
        Prior probability that a date is an outlier, in [0, 0.5]. Default 0.05.
    student_t : bool
        Calibrate radiocarbon dates with the Student-t likelihood (Christen & Perez 2009).
        Default false.
    t_a, t_b : float
        Its parameters. Default 3 and 4.
    default_curve : str or None
        Curve for radiocarbon dates whose ``curve`` cell is empty; ``None`` (default): the
        only curve of ``[curves]``, or the one named ``atmosphere``.
    core_top : bool
        Add the core top (1950 - collected, error ``top_age_error``) as a calendar date at
        depth 0. Default true.
    top_age_error_yr : float
        Core-top error when ``core.toml`` gives none [yr]. Default 5.
    output_step_cm : float
        Depth step of ``chronology.parquet`` and the ensemble table [cm]. Default 1.
    """

    model: str = "accumulation"
    join: str = "linear"
    node_spacing_cm: float = 5.0
    max_nodes: int = 300
    grid_step_yr: float | None = None
    calibration_step_yr: float = 1.0
    mean_rate_yr_cm: float | None = None
    rate_multipliers: tuple[float, ...] = (0.5, 0.71, 1.0, 1.41, 2.0)
    rate_shapes: tuple[float, ...] = (1.5, 3.0, 6.0, 12.0, 24.0, 48.0)
    hiatus_gap_yr: float = 5000.0
    outlier_prior: float = 0.05
    student_t: bool = False
    t_a: float = 3.0
    t_b: float = 4.0
    default_curve: str | None = None
    core_top: bool = True
    top_age_error_yr: float = 5.0
    output_step_cm: float = 1.0

    @classmethod
    def from_mapping(cls, mapping: dict | None, where: str = "[chronology]") -> "ChronologySettings":
        """Validate a ``[chronology]`` TOML section and build the settings.

        Raises
        ------
        proxies.problems.InputError
            Naming every unknown key, wrong type or out-of-range value (``column`` = key).
        """
        return settings_from_mapping(cls, mapping, where, lambda key, value: _check(key, value, where))


def _is_number(value) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def _check(key: str, value, where: str):
    if key in _BOOLS:
        if not isinstance(value, bool):
            return Problem(where, f"'{key}' must be true or false, got {value!r}", "write true or false", column=key)
        return value
    if key in _CHOICES:
        if value not in _CHOICES[key]:
            return Problem(where, f"'{key}' = {value!r} is not one of {', '.join(_CHOICES[key])}",
                           f'e.g. {key} = "{_CHOICES[key][0]}"', column=key)
        return value
    if key == "default_curve":
        if not isinstance(value, str) or not value:
            return Problem(where, "'default_curve' must name a curve of [curves]", 'e.g. default_curve = "atmosphere"',
                           column=key)
        return value
    if key in _AUTO_NUMBERS:
        if value == "auto":
            return None
        lower, example = _AUTO_NUMBERS[key]
        if not _is_number(value) or not value > lower:
            return Problem(where, f"'{key}' must be \"auto\" or a positive number, got {value!r}",
                           f"e.g. {key} = {example}", column=key)
        return float(value)
    if key in _LISTS:
        if not (isinstance(value, list) and value and all(_is_number(v) and v > 0 for v in value)):
            return Problem(where, f"'{key}' must be a non-empty list of positive numbers, got {value!r}",
                           f"e.g. {key} = {_LISTS[key]}", column=key)
        return tuple(float(v) for v in value)
    kind, lower, upper, example = _NUMBERS[key]
    ok = isinstance(value, int) if kind is int else _is_number(value)
    if isinstance(value, bool) or not ok:
        return Problem(where, f"'{key}' must be a{'n integer' if kind is int else ' number'}, got {value!r}",
                       f"e.g. {key} = {example}", column=key)
    value = kind(value)
    if not value > lower or (upper is not None and value > upper):
        bound = (f"> {lower:g}" if lower > -1e-9 else ">= 0") + (f" and <= {upper:g}" if upper is not None else "")
        return Problem(where, f"'{key}' = {value} is out of range; it must be {bound}",
                       f"e.g. {key} = {example}", column=key)
    return value
