"""Radiocarbon curves, conversions, date calibration and age-depth models.

- :mod:`~proxies.chronology.radiocarbon` -- F14C, radiocarbon age, pMC, Delta14C;
- :mod:`~proxies.chronology.curves` -- calibration curves, regular grids, mixtures;
- :mod:`~proxies.chronology.calibrate` -- vectorised calibration and HPD ranges;
- :mod:`~proxies.chronology.interpolation` -- Monte Carlo interpolation model;
- :mod:`~proxies.chronology.accumulation` -- Bayesian accumulation model (exact HMM);
- :mod:`~proxies.chronology.settings` -- :class:`ChronologySettings` (``[chronology]``);
- :mod:`~proxies.chronology.stage` -- :func:`build_chronology`, the pipeline's seam.
"""

from proxies._lazy import lazy_exports

#: public name -> module it lives in (imported on first use)
_EXPORTS = {
    "CalibratedDates": ".calibrate",
    "CalibrationCurve": ".curves",
    "ChronologyResult": ".stage",
    "ChronologySettings": ".settings",
    "CurveRangeError": ".calibrate",
    "build_chronology": ".stage",
    "calibrate_calendar": ".calibrate",
    "calibrate_radiocarbon": ".calibrate",
    "curve_from_table": ".curves",
    "hpd_ranges": ".calibrate",
    "blend_curves": ".curves",
    "parse_curve_text": ".curves",
}

__all__ = sorted(_EXPORTS)
__getattr__, __dir__ = lazy_exports(__name__, _EXPORTS)
