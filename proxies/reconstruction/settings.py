"""Settings of the reconstruction stage: the ``[reconstruction]`` section of the run config."""

from __future__ import annotations

from dataclasses import dataclass

from proxies.problems import Problem
from proxies.settings_checks import settings_from_mapping

__all__ = ["ReconstructionSettings", "WMO_NORMAL_PERIODS"]

#: WMO climatological standard normal periods (WMO-No. 1203), first and last year CE.
WMO_NORMAL_PERIODS = {"1961-1990": (1961, 1990), "1991-2020": (1991, 2020)}

_BINNING = ("bin", "interpolate")
_REFERENCE = ("auto", "normal", "window", "record")
_STACK_METHODS = ("anomaly", "zscore")


@dataclass(frozen=True)
class ReconstructionSettings:
    """How calibrated ensembles are put on a time grid, referenced and stacked.

    Attributes
    ----------
    grid_step_yr : float
        Spacing of the regular time grid [yr]. Grid points are multiples of the step, so that
        the grids of all cores of a run line up. Default 50.
    grid_young_cal_bp, grid_old_cal_bp : float or None
        Grid range [cal BP]; ``None`` (default) takes it from the median ages of the samples.
    binning : {"bin", "interpolate"}
        ``"bin"`` (default): mean of the samples whose age (per member) falls in the grid
        cell; cells without a sample stay empty. ``"interpolate"``: linear interpolation of
        each member at the grid points inside the member's age range (no extrapolation).
    reference : {"auto", "normal", "window", "record"}
        Reference for anomalies. ``"normal"``: the WMO standard normal ``normal_period``;
        ``"window"``: the window ``reference_young_cal_bp``..``reference_old_cal_bp``;
        ``"record"``: the whole grid range; ``"auto"`` (default): the normal when the record
        covers it, else the window when one is given, else the whole record.
    normal_period : {"1961-1990", "1991-2020"}
        WMO climatological standard normal used by ``"normal"``/``"auto"``. Default 1961-1990.
    reference_young_cal_bp, reference_old_cal_bp : float or None
        A user-stated reference window [cal BP].
    min_member_share : float
        A grid point gets quantiles only when at least this share of members has a value
        there. Default 0.5.
    stack_method : {"anomaly", "zscore"}
        Regional composite of departures from the stack-window mean (``"anomaly"``, default)
        or of z-scores over the stack window (``"zscore"``).
    stack_young_cal_bp, stack_old_cal_bp : float or None
        Common window of the composite [cal BP]; ``None`` (default): the overlap of all records.
    """

    grid_step_yr: float = 50.0
    grid_young_cal_bp: float | None = None
    grid_old_cal_bp: float | None = None
    binning: str = "bin"
    reference: str = "auto"
    normal_period: str = "1961-1990"
    reference_young_cal_bp: float | None = None
    reference_old_cal_bp: float | None = None
    min_member_share: float = 0.5
    stack_method: str = "anomaly"
    stack_young_cal_bp: float | None = None
    stack_old_cal_bp: float | None = None

    @property
    def reference_window(self) -> tuple[float, float] | None:
        """The user-stated reference window (young, old) [cal BP], or ``None``."""
        if self.reference_young_cal_bp is None or self.reference_old_cal_bp is None:
            return None
        return (float(self.reference_young_cal_bp), float(self.reference_old_cal_bp))

    @property
    def stack_window(self) -> tuple[float, float] | None:
        """The user-stated stack window (young, old) [cal BP], or ``None``."""
        if self.stack_young_cal_bp is None or self.stack_old_cal_bp is None:
            return None
        return (float(self.stack_young_cal_bp), float(self.stack_old_cal_bp))

    @classmethod
    def from_mapping(cls, mapping: dict | None, where: str = "[reconstruction]") -> "ReconstructionSettings":
        """Validate a ``[reconstruction]`` TOML section and build the settings.

        Raises
        ------
        proxies.problems.InputError
            Naming every unknown key, wrong type or out-of-range value (``column`` = key).
        """
        return settings_from_mapping(cls, mapping, where, lambda key, value: _check(key, value, where),
                                     lambda values: _cross_check(values, where))


_OPTIONAL_NUMBERS = ("grid_young_cal_bp", "grid_old_cal_bp", "reference_young_cal_bp",
                     "reference_old_cal_bp", "stack_young_cal_bp", "stack_old_cal_bp")


def _check(key: str, value, where: str):
    """The value of one ``[reconstruction]`` key, converted, or the :class:`Problem` with it."""
    choices = {"binning": _BINNING, "reference": _REFERENCE,
               "normal_period": tuple(WMO_NORMAL_PERIODS), "stack_method": _STACK_METHODS}
    if key in choices:
        if value not in choices[key]:
            return Problem(where, f"'{key}' = {value!r} is not allowed",
                           f"use one of: {', '.join(choices[key])}", column=key)
        return value
    if key not in ("grid_step_yr", "min_member_share", *_OPTIONAL_NUMBERS):
        return value
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return Problem(where, f"'{key}' must be a number, got {value!r}", "write a plain number, e.g. 50",
                       column=key)
    value = float(value)
    if key == "grid_step_yr" and not value > 0:
        return Problem(where, "'grid_step_yr' must be > 0", "give the grid spacing in years, e.g. 50", column=key)
    if key == "min_member_share" and not 0 < value <= 1:
        return Problem(where, "'min_member_share' must be in (0, 1]", "e.g. 0.5", column=key)
    return value


def _cross_check(values: dict, where: str) -> list[Problem]:
    """Problems that involve two keys: windows given by halves or upside down."""
    problems = []
    for prefix in ("grid", "reference", "stack"):
        young, old = values.get(f"{prefix}_young_cal_bp"), values.get(f"{prefix}_old_cal_bp")
        if (young is None) != (old is None):
            missing = f"{prefix}_old_cal_bp" if old is None else f"{prefix}_young_cal_bp"
            problems.append(Problem(where, f"'{prefix}_young_cal_bp' and '{prefix}_old_cal_bp' "
                                    "must be given together", f"add '{missing}'", column=missing))
        elif young is not None and not young < old:
            problems.append(Problem(where, f"'{prefix}_young_cal_bp' ({young}) must be younger "
                                    f"(smaller) than '{prefix}_old_cal_bp' ({old})",
                                    "swap the two values", column=f"{prefix}_young_cal_bp"))
    if values.get("reference") == "window" and values.get("reference_young_cal_bp") is None:
        problems.append(Problem(where, "reference = 'window' needs a reference window",
                                "add reference_young_cal_bp and reference_old_cal_bp", column="reference"))
    return problems
