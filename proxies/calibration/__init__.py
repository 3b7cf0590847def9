"""Proxy calibration: published equations, instrumental overlap and transfer functions.

- :mod:`.equations` -- published single-proxy equations and their inverses;
- :mod:`.inversion` -- ensemble inversion with analytical and calibration error;
- :mod:`.overlap` and :mod:`.skill` -- calibration against instrumental series with
  split-period verification (r2, RMSE, RE, CE, Durbin-Watson, effective n);
- :mod:`.wa`, :mod:`.wapls`, :mod:`.mat` -- transfer functions as scikit-learn estimators;
- :mod:`.assemblage`, :mod:`.crossval`, :mod:`.diagnostics` -- data preparation,
  cross-validation and fossil-sample diagnostics;
- :mod:`.stage` -- :func:`fit_transfer_function` and :func:`calibrate_core`.
"""

from proxies._lazy import lazy_exports

#: public name -> module it lives in (imported on first use)
_EXPORTS = {
    "CalibratedRecord": ".stage",
    "CalibrationResult": ".stage",
    "CalibrationSettings": ".settings",
    "Coefficient": ".equations",
    "FittedTransfer": ".stage",
    "InstrumentalSeries": ".data",
    "InstrumentalSpec": ".settings",
    "MAT": ".mat",
    "PUBLISHED_EQUATIONS": ".equations",
    "ProxyCalibration": ".settings",
    "PublishedEquation": ".equations",
    "TrainingSet": ".data",
    "TrainingSpec": ".settings",
    "WA": ".wa",
    "WAPLS": ".wapls",
    "calibrate_core": ".stage",
    "fit_transfer_function": ".stage",
    "published_equation": ".equations",
}

__all__ = sorted(_EXPORTS)
__getattr__, __dir__ = lazy_exports(__name__, _EXPORTS)
