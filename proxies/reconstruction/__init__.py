"""Reconstruction: calibrated ensembles on a regular time grid, anomalies, regional stacks.

- :mod:`~proxies.reconstruction.grid` -- time grid, per-member cell means and interpolation, CE;
- :mod:`~proxies.reconstruction.anomalies` -- reference windows (WMO normals) and anomalies;
- :mod:`~proxies.reconstruction.quantiles` -- quantile bands over members;
- :mod:`~proxies.reconstruction.stack` -- regional composite of several cores;
- :mod:`~proxies.reconstruction.stage` -- :func:`reconstruct_core`, the stage function.
"""

from proxies._lazy import lazy_exports

#: public name -> module it lives in (imported on first use)
_EXPORTS = {
    "GridSeries": ".stage",
    "ReconstructionResult": ".stage",
    "ReconstructionSettings": ".settings",
    "reconstruct_core": ".stage",
    "stack_records": ".stack",
}

__all__ = sorted(_EXPORTS)
__getattr__, __dir__ = lazy_exports(__name__, _EXPORTS)
