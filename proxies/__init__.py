"""downcore's science core: pure functions and scikit-learn-style estimators.

Sub-packages, one science concept each:

- :mod:`proxies.cores` -- the core data model, validation and depth scales;
- :mod:`proxies.chronology` -- radiocarbon curves, date calibration and age-depth models;
- :mod:`proxies.calibration` -- published proxy equations, instrumental-overlap regression and
  assemblage transfer functions (WA, WA-PLS, MAT);
- :mod:`proxies.reconstruction` -- ensembles on a time grid, anomalies and regional composites;
- :mod:`proxies.events` -- abrupt-event detection (ramps, change points, red-noise significance).

Nothing here imports Prefect or touches the file system: arrays and DataFrames in, arrays
and DataFrames out. File reading and writing lives in the :mod:`pipelines` package.
"""

__version__ = "0.1.0"
