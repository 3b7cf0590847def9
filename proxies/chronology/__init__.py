"""Radiocarbon curves, conversions, date calibration and age-depth models.

- :mod:`~proxies.chronology.radiocarbon` -- F14C, radiocarbon age, pMC, Delta14C;
- :mod:`~proxies.chronology.curves` -- calibration curves, regular grids, mixtures;
- :mod:`~proxies.chronology.calibrate` -- vectorised calibration and HPD ranges;
- :mod:`~proxies.chronology.interpolation` -- Monte Carlo interpolation model;
- :mod:`~proxies.chronology.accumulation` -- Bayesian accumulation model (exact HMM);
- :mod:`~proxies.chronology.settings` -- :class:`ChronologySettings` (``[chronology]``);
- :mod:`~proxies.chronology.stage` -- :func:`build_chronology`, the pipeline's seam.
"""

from proxies.chronology.calibrate import (
    CalibratedDates,
    CurveRangeError,
    calibrate_calendar,
    calibrate_radiocarbon,
    hpd_ranges,
)
from proxies.chronology.curves import CalibrationCurve, curve_from_table, mix_curves, parse_curve_text
from proxies.chronology.settings import ChronologySettings
from proxies.chronology.stage import ChronologyResult, build_chronology

__all__ = [
    "CalibratedDates",
    "CalibrationCurve",
    "ChronologyResult",
    "ChronologySettings",
    "CurveRangeError",
    "build_chronology",
    "calibrate_calendar",
    "calibrate_radiocarbon",
    "curve_from_table",
    "hpd_ranges",
    "mix_curves",
    "parse_curve_text",
]
