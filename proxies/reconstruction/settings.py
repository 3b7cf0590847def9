"""Settings of the reconstruction stage: the ``[reconstruction]`` section of the run config."""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

from proxies.problems import Problem
from proxies.settings_spec import DeclaredSection, setting

__all__ = ["ReconstructionSettings", "WMO_NORMAL_PERIODS"]

#: WMO climatological standard normal periods (WMO-No. 1203), first and last year CE.
WMO_NORMAL_PERIODS = {"1961-1990": (1961, 1990), "1991-2020": (1991, 2020)}

_BINNING = ("filled", "bin", "interpolate")
_REFERENCE = ("auto", "normal", "window", "record")
_STACK_METHODS = ("anomaly", "zscore")


@dataclass(frozen=True)
class ReconstructionSettings(DeclaredSection):
    """How calibrated ensembles are put on a time grid, referenced and stacked (one attribute
    per key).

    Grid points are multiples of ``grid_step_yr``, so that the grids of all cores of a run line
    up; ``"auto"`` (the default) takes the median spacing of the core's sample ages (median
    member) rounded to a standard step (1-2-5 series, see
    :func:`~proxies.reconstruction.grid.auto_grid_step_yr`), so the grid follows the record.
    The grid range is taken from the samples' median ages unless given. ``binning``:
    ``"filled"`` (default) is the mean of the samples whose age (per member) falls in a cell,
    empty cells between samples being filled by linear interpolation of that member's samples
    (across gaps up to ``fill_max_gap_yr``, by default 3 x the record's median sample spacing);
    ``"bin"`` is the cell mean only, cells without a sample staying empty; ``"interpolate"``
    is linear interpolation of each member at the cell centres inside its age range (never
    extrapolation). A record whose values cover less than ``min_filled_share`` of its age
    span is reported as thin (the core's status is then ``thin``, not ``ok``). ``reference``: ``"normal"`` the WMO standard normal
    ``normal_period``; ``"window"`` the stated reference window; ``"record"`` the whole grid
    range; ``"auto"`` the normal when the record covers it, else the window when one is given,
    else the whole record. ``stack_method``: departures from the stack-window mean
    (``"anomaly"``) or z-scores over the stack window (``"zscore"``); the stack window is the
    overlap of all records unless given.
    """

    SECTION: ClassVar[str] = "reconstruction"

    grid_step_yr: float | None = setting(None, "spacing of the regular time grid [yr]; auto: the "
                                         "median sample spacing rounded to 1, 2 or 5 x 10^k yr",
                                         kind=float, low=0.0, low_open=True, auto=True)
    grid_young_cal_bp: float | None = setting(None, "young end of the grid [cal BP]", kind=float)
    grid_old_cal_bp: float | None = setting(None, "old end of the grid [cal BP]", kind=float)
    binning: str = setting("filled", "how members are put on the grid: cell means with gaps between "
                           "samples interpolated, cell means only, or interpolation only",
                           choices=_BINNING)
    fill_max_gap_yr: float | None = setting(None, "binning 'filled' bridges gaps between samples up to "
                                            "this length [yr]; auto: 3 x the record's median "
                                            "sample spacing", kind=float, low=0.0, low_open=True,
                                            auto=True)
    reference: str = setting("auto", "reference period of the anomalies", choices=_REFERENCE)
    normal_period: str = setting("1961-1990", "WMO climatological standard normal",
                                 choices=tuple(WMO_NORMAL_PERIODS))
    reference_young_cal_bp: float | None = setting(None, "young end of a stated reference window "
                                                   "[cal BP]", kind=float)
    reference_old_cal_bp: float | None = setting(None, "old end of a stated reference window "
                                                 "[cal BP]", kind=float)
    min_member_share: float = setting(0.5, "a grid point gets quantiles only when at least this "
                                      "share of members has a value there", low=0.0, high=1.0,
                                      low_open=True)
    min_filled_share: float = setting(0.5, "a record with values over less than this share of its "
                                      "age span is thin (core status 'thin')", low=0.0, high=1.0)
    stack_method: str = setting("anomaly", "how records enter the regional composite",
                                choices=_STACK_METHODS)
    stack_young_cal_bp: float | None = setting(None, "young end of the composite's window [cal BP]",
                                               kind=float)
    stack_old_cal_bp: float | None = setting(None, "old end of the composite's window [cal BP]",
                                             kind=float)

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
    def cross_check(cls, values: dict, where: str) -> list[Problem]:
        return _cross_check(values, where)


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
