"""Reconstruction: calibrated ensembles on a regular time grid, anomalies, regional stacks.

- :mod:`~proxies.reconstruction.grid` -- time grid, per-member cell means and interpolation, CE;
- :mod:`~proxies.reconstruction.anomalies` -- reference windows (WMO normals) and anomalies;
- :mod:`~proxies.reconstruction.quantiles` -- quantile bands over members;
- :mod:`~proxies.reconstruction.stack` -- regional composite of several cores;
- :mod:`~proxies.reconstruction.stage` -- :func:`reconstruct_core`, the stage function.
"""

from proxies._lazy import lazy_exports

#: module -> the public names it gives (each imported on first use)
__getattr__, __dir__, __all__ = lazy_exports(__name__, {
    ".settings": "ReconstructionSettings",
    ".stack": "stack_records",
    ".stage": "GridSeries ReconstructionResult reconstruct_core",
})
