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

from .data import InstrumentalSeries, TrainingSet
from .equations import PUBLISHED_EQUATIONS, Coefficient, PublishedEquation, published_equation
from .mat import MAT
from .settings import CalibrationSettings, InstrumentalSpec, ProxyCalibration, TrainingSpec
from .stage import (CalibratedRecord, CalibrationResult, FittedTransfer, calibrate_core,
                    fit_transfer_function)
from .wa import WA
from .wapls import WAPLS

__all__ = [
    "WA", "WAPLS", "MAT", "TrainingSet", "InstrumentalSeries", "CalibrationSettings",
    "ProxyCalibration", "TrainingSpec", "InstrumentalSpec", "FittedTransfer",
    "CalibratedRecord", "CalibrationResult", "fit_transfer_function", "calibrate_core",
    "PUBLISHED_EQUATIONS", "PublishedEquation", "Coefficient", "published_equation",
]
