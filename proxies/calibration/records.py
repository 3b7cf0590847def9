"""What every calibration method receives and returns (the registry's contract).

A method is a function ``calibrate(settings, inputs) -> MethodResult`` registered under its
name in :data:`proxies.calibration.stage.CALIBRATORS`, with its settings class of the same
name in :data:`proxies.calibration.settings.METHOD_SETTINGS`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np
import pandas as pd

from proxies.problems import Problem

__all__ = ["CalibratedRecord", "MethodResult", "CoreInputs", "ProxyColumn", "proxy_column",
           "in_event_layers", "event_layer_sample_warnings"]


@dataclass(frozen=True)
class CalibratedRecord:
    """One calibrated proxy of one core.

    ``values`` has shape (n, M): member m of the climate at ``depth_cm``; for overlap
    calibrations member m used age path m. ``outside_range`` (n,) marks samples outside the
    range the calibration was made on (proxy or median climate); ``source_row`` (n,) is the
    1-based row of the input table (``None`` when unknown).
    """

    proxy: str
    variable: str
    units: str
    method: str
    reference: str
    depth_cm: np.ndarray
    values: np.ndarray
    outside_range: np.ndarray | None = None
    source_row: np.ndarray | None = None


@dataclass
class MethodResult:
    """What one method returns for one proxy of one core.

    Attributes
    ----------
    record : CalibratedRecord or None
        ``None`` when the record was refused (the skill rows say why).
    skill : list of dict
        Rows of ``calibration.parquet`` (without the ``proxy`` and ``method`` columns).
    diagnostics : pandas.DataFrame or None
        Rows of ``calibration_diagnostics.parquet`` (transfer functions).
    warnings : list of str
    """

    record: CalibratedRecord | None
    skill: list = field(default_factory=list)
    diagnostics: pd.DataFrame | None = None
    warnings: list = field(default_factory=list)


@dataclass(frozen=True)
class CoreInputs:
    """Everything of one core and one run a calibration method may use.

    ``chronology.age_at(depth_cm) -> (k, M)`` [cal BP]; ``transfer`` maps training-set names
    to fitted transfer functions and ``instrumental`` series names to series.
    """

    core: Any
    chronology: Any
    transfer: Mapping[str, Any]
    instrumental: Mapping[str, Any]
    ensemble: int
    rng: np.random.Generator


def in_event_layers(depth_cm, event_layers) -> np.ndarray:
    """Whether each depth lies inside a listed event layer (top < depth < bottom) [cm]."""
    depth = np.asarray(depth_cm, dtype=float)
    inside = np.zeros(depth.shape, dtype=bool)
    for layer in event_layers or ():
        inside |= (depth > layer.top_cm) & (depth < layer.bottom_cm)
    return inside


def event_layer_sample_warnings(core, samples_file: str = "samples",
                                counts_file: str = "counts") -> list[Problem]:
    """One warning per sample (or count) row whose depth lies inside an event layer.

    Such samples record an instantaneous deposit, not the climate of their age; calibration
    leaves them out unless ``event_layer_samples = "keep"``.
    """
    warnings = []
    for name, table in ((samples_file, core.samples), (counts_file, core.counts)):
        if table is None or "depth_cm" not in table:
            continue
        inside = in_event_layers(table["depth_cm"].to_numpy(dtype=float), core.event_layers)
        rows = table["source_row"].to_numpy() if "source_row" in table else \
            np.arange(2, len(table) + 2)
        for depth, row in zip(table["depth_cm"].to_numpy(dtype=float)[inside], rows[inside]):
            warnings.append(Problem(
                name, f"sample at {depth:g} cm lies inside an event layer; calibration leaves "
                "it out", 'set event_layer_samples = "keep" in its [calibration.<column>] to '
                "use it", row=int(row), column="depth_cm"))
    return warnings


@dataclass(frozen=True)
class ProxyColumn:
    """The usable samples of one proxy column (finite value, outside event layers unless
    kept): ``values``, 1-sigma ``errors`` (0 where not given), ``depth_cm``, ``rows``
    (positions in ``core.samples``), ``source_row`` and ``n_in_event_layers`` left out."""

    values: np.ndarray
    errors: np.ndarray
    depth_cm: np.ndarray
    rows: np.ndarray
    source_row: np.ndarray | None
    n_in_event_layers: int


def proxy_column(core, column: str, keep_event_samples: bool) -> ProxyColumn | None:
    """The usable samples of ``column`` (``None`` when the core lacks the column)."""
    samples = core.samples
    if column not in samples:
        return None
    values = samples[column].to_numpy(dtype=float)
    depth = samples["depth_cm"].to_numpy(dtype=float)
    usable = np.isfinite(values)
    inside = usable & in_event_layers(depth, core.event_layers)
    if not keep_event_samples:
        usable &= ~inside
    rows = np.flatnonzero(usable)
    error_column = f"{column}_error"
    errors = np.nan_to_num(samples[error_column].to_numpy(dtype=float)[rows]) \
        if error_column in samples else np.zeros(rows.size)
    source = samples["source_row"].to_numpy()[rows] if "source_row" in samples else None
    return ProxyColumn(values[rows], errors, depth[rows], rows, source,
                       0 if keep_event_samples else int(inside.sum()))
