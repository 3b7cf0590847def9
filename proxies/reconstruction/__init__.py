"""Reconstruction: calibrated ensembles on a regular time grid, anomalies, regional stacks.

- :mod:`~proxies.reconstruction.grid` -- time grid, per-member cell means and interpolation, CE;
- :mod:`~proxies.reconstruction.anomalies` -- reference windows (WMO normals) and anomalies;
- :mod:`~proxies.reconstruction.quantiles` -- quantile bands over members;
- :mod:`~proxies.reconstruction.stack` -- regional composite of several cores;
- :mod:`~proxies.reconstruction.stage` -- :func:`reconstruct_core`, the stage function.
"""

from proxies.reconstruction.settings import ReconstructionSettings
from proxies.reconstruction.stack import stack_records
from proxies.reconstruction.stage import (GridSeries, ReconstructionResult, member_column_names,
                                          reconstruct_core)

__all__ = ["ReconstructionSettings", "GridSeries", "ReconstructionResult", "reconstruct_core",
           "stack_records", "member_column_names"]
