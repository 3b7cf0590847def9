"""Proxy calibration: published equations, instrumental overlap and transfer functions.

- :mod:`.equations` -- published single-proxy equations and their inverses;
- :mod:`.inversion` -- ensemble inversion with analytical and calibration error;
- :mod:`.overlap` and :mod:`.skill` -- calibration against instrumental series with
  split-period verification (r2, RMSE, RE, CE, Durbin-Watson, effective n);
- :mod:`.wa`, :mod:`.wapls`, :mod:`.mat` -- transfer functions as scikit-learn estimators;
- :mod:`.assemblage`, :mod:`.crossval`, :mod:`.diagnostics` -- data preparation,
  cross-validation and fossil-sample diagnostics;
- :mod:`.settings`, :mod:`.training_settings` -- one settings class per method and section;
- :mod:`.records` -- what a method receives and returns; :mod:`.equation_methods`,
  :mod:`.overlap_method`, :mod:`.transfer` -- the methods; :mod:`.significance` -- the
  randomisation t-test and the random-variable test;
- :mod:`.stage` -- the method registry and :func:`calibrate_core`;
  :func:`fit_transfer_function` fits a training set once per run.
"""

from proxies._lazy import lazy_exports

#: public name -> module it lives in (imported on first use)
_EXPORTS = {
    "CalibratedRecord": ".records",
    "CalibrationResult": ".stage",
    "CalibrationSettings": ".settings",
    "Coefficient": ".equations",
    "FittedTransfer": ".transfer",
    "CALIBRATORS": ".stage",
    "METHOD_SETTINGS": ".settings",
    "TrainingSettings": ".training_settings",
    "InstrumentalSettings": ".training_settings",
    "event_layer_sample_warnings": ".records",
    "InstrumentalSeries": ".data",
    "InstrumentalSpec": ".training_settings",
    "MAT": ".mat",
    "PUBLISHED_EQUATIONS": ".equations",
    "ProxyCalibration": ".settings",
    "PublishedEquation": ".equations",
    "TrainingSet": ".data",
    "TrainingSpec": ".training_settings",
    "WA": ".wa",
    "WAPLS": ".wapls",
    "calibrate_core": ".stage",
    "fit_transfer_function": ".transfer",
    "published_equation": ".equations",
}

__all__ = sorted(_EXPORTS)
__getattr__, __dir__ = lazy_exports(__name__, _EXPORTS)
