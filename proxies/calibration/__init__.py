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

#: module -> the public names it gives (each imported on first use)
__getattr__, __dir__, __all__ = lazy_exports(__name__, {
    ".data": "InstrumentalSeries TrainingSet",
    ".equations": "Coefficient PUBLISHED_EQUATIONS PublishedEquation published_equation",
    ".mat": "MAT",
    ".records": "CalibratedRecord event_layer_sample_warnings",
    ".settings": "CalibrationSettings METHOD_SETTINGS ProxyCalibration",
    ".stage": "CALIBRATORS CalibrationResult calibrate_core",
    ".training_settings": "InstrumentalSettings InstrumentalSpec TrainingSettings TrainingSpec",
    ".transfer": "FittedTransfer fit_transfer_function",
    ".wa": "WA",
    ".wapls": "WAPLS",
})
