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

#: module -> the public names it gives (each imported on first use)
__getattr__, __dir__, __all__ = lazy_exports(__name__, {
    ".calibrate": "CalibratedDates CurveRangeError calibrate_calendar calibrate_radiocarbon hpd_ranges",
    ".curves": "CalibrationCurve blend_curves curve_from_table parse_curve_text",
    ".settings": "ChronologySettings",
    ".stage": "ChronologyResult build_chronology",
})
