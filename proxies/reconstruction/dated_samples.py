"""The per-sample table of a core: every sample with its depth, age, raw proxies, calibrated
values and flags -- the table a paper's supplement holds.

One row per sample level (the depths of the samples table and of the counts table, merged
where they coincide), in depth order. Columns, with their units in the name:

- ``depth_cm``, ``thickness_cm``, ``event_free_depth_cm`` (composite depth with the event
  layers cut out, the depth scale of the age model), ``section``/``section_depth_cm`` when the
  core has sections, ``samples_row``/``counts_row`` (1-based row of the input file);
- ``age_median_cal_bp``, ``age_q160_cal_bp``/``age_q840_cal_bp`` (68 % range) and
  ``age_q025_cal_bp``/``age_q975_cal_bp`` (95 % range), over the age-ensemble members;
- ``in_event_layer`` (the sample lies inside an instantaneous deposit) and
  ``event_layer_kind``;
- every raw proxy column of the samples table as given (with its ``_error`` column), and
  ``count_sum`` (total count of the sample) for assemblage counts;
- per calibrated record: ``<variable>_<units>_from_<proxy>_median``, ``_q025``, ``_q975``
  (over the calibration members), ``<proxy>_uncalibrated`` (a raw value without a calibrated
  value, e.g. outside an equation's domain), ``<proxy>_outside_range`` (the proxy or its
  calibrated value lies outside the range the published equation was calibrated on) and, for
  transfer functions,
  ``<proxy>_analogue`` (good | fair | none) and ``<proxy>_poor_analogue``
  (no close modern analogue).

Every proxy appears, calibrated or not: a proxy without a calibration still gets its ages.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from proxies.warning_sinks import quiet_warnings

__all__ = ["DatedSamples", "dated_sample_table", "calibrated_column_stem", "AGE_LEVELS",
           "column_units"]

#: probabilities of the age columns: 95 % range, 68 % range, median
AGE_LEVELS = {"age_q025_cal_bp": 0.025, "age_q160_cal_bp": 0.16, "age_median_cal_bp": 0.5,
              "age_q840_cal_bp": 0.84, "age_q975_cal_bp": 0.975}
#: probabilities of a calibrated value's columns (median and 95 % range)
VALUE_LEVELS = {"median": 0.5, "q025": 0.025, "q975": 0.975}

_UNIT_WORDS = {"%": "percent", "‰": "permil", "°c": "degC", "degc": "degC", "": ""}


@dataclass(frozen=True)
class DatedSamples:
    """The per-sample table and what each column means.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per sample level (see the module docstring).
    columns : dict
        Column -> one-line description with units (for documentation and exports).
    """

    table: pd.DataFrame
    columns: dict[str, str] = field(default_factory=dict)


def calibrated_column_stem(variable: str, units: str, proxy: str) -> str:
    """Stem of a calibrated record's columns: ``"sst_degC_from_uk37"``.

    >>> calibrated_column_stem("sst", "degC", "uk37"), calibrated_column_stem("tann", "°C", "counts")
    ('sst_degC_from_uk37', 'tann_degC_from_counts')
    """
    word = _UNIT_WORDS.get(str(units).strip().lower(), str(units).strip())
    word = re.sub(r"[^A-Za-z0-9]+", "_", word).strip("_")
    parts = [str(variable), word, "from", str(proxy)] if word else [str(variable), "from", str(proxy)]
    return "_".join(parts)


def column_units(column: str) -> str:
    """Units of a per-sample column as its name states them (``""`` when it does not).

    >>> column_units("age_q025_cal_bp"), column_units("depth_cm"), column_units("sst_degC_from_uk37_q975")
    ('year', 'cm', 'degC')
    """
    if column.endswith("_cal_bp"):
        return "year"
    if column.endswith("_cm"):
        return "cm"
    match = re.match(r".+?_([A-Za-z0-9]+)_from_.+_(median|q025|q975)$", column)
    return match.group(1) if match else ""


def _levels(*tables) -> np.ndarray:
    """The union of the sample depths of the given tables [cm], sorted."""
    depths = [np.asarray(t["depth_cm"], dtype=float) for t in tables if t is not None]
    return np.unique(np.concatenate(depths)) if depths else np.zeros(0)


def _position(levels: np.ndarray, depth_cm) -> np.ndarray:
    return np.searchsorted(levels, np.asarray(depth_cm, dtype=float))


def _placed(levels: np.ndarray, depth_cm, values, fill=np.nan, dtype=float) -> np.ndarray:
    out = np.full(levels.size, fill, dtype=dtype)
    out[_position(levels, depth_cm)] = values
    return out


def _bookkeeping(core, levels: np.ndarray) -> dict[str, np.ndarray]:
    samples, counts = core.samples, core.counts
    columns: dict[str, np.ndarray] = {"depth_cm": levels}
    thickness = np.full(levels.size, np.nan)
    for table in (counts, samples):  # samples win where both give a thickness
        if table is not None and "thickness_cm" in table:
            given = np.isfinite(table["thickness_cm"].to_numpy(dtype=float))
            thickness[_position(levels, table["depth_cm"].to_numpy(float)[given])] = \
                table["thickness_cm"].to_numpy(dtype=float)[given]
    columns["thickness_cm"] = thickness
    scale = core.depth_scale
    columns["event_free_depth_cm"] = np.asarray(scale.event_free_depth(levels), dtype=float)
    if any(t is not None and "section" in t for t in (samples, counts)):
        section = np.full(levels.size, None, dtype=object)
        within = np.full(levels.size, np.nan)
        for table in (counts, samples):
            if table is not None and "section" in table:
                where = _position(levels, table["depth_cm"])
                section[where] = table["section"].astype(str).to_numpy()
                within[where] = table["section_depth_cm"].to_numpy(dtype=float)
        columns["section"], columns["section_depth_cm"] = section, within
    for name, table in (("samples_row", samples), ("counts_row", counts)):
        if table is not None and "source_row" in table:
            columns[name] = _placed(levels, table["depth_cm"], table["source_row"].to_numpy(), -1, np.int64)
    return columns


def _age_columns(chronology, levels: np.ndarray) -> dict[str, np.ndarray]:
    ages = np.asarray(chronology.age_at(levels), dtype=float)
    with quiet_warnings(RuntimeWarning):
        q = np.nanquantile(ages, list(AGE_LEVELS.values()), axis=1)
    order = ("age_median_cal_bp", "age_q160_cal_bp", "age_q840_cal_bp", "age_q025_cal_bp",
             "age_q975_cal_bp")
    by_name = dict(zip(AGE_LEVELS, q))
    return {name: by_name[name] for name in order}


def _event_layer_columns(core, levels: np.ndarray) -> dict[str, np.ndarray]:
    inside = np.zeros(levels.size, dtype=bool)
    kind = np.full(levels.size, "", dtype=object)
    for layer in core.event_layers:
        here = (levels > layer.top_cm) & (levels < layer.bottom_cm)
        inside |= here
        kind[here] = str(getattr(layer, "kind", "") or "event layer")
    return {"in_event_layer": inside, "event_layer_kind": kind}


def _raw_columns(core, levels: np.ndarray) -> dict[str, np.ndarray]:
    """Every proxy column of the samples table with its error column, and the count sums."""
    out: dict[str, np.ndarray] = {}
    samples = core.samples
    for proxy in core.proxy_columns:
        for column in (proxy, core.error_column(proxy)):
            if column is not None:
                out[column] = _placed(levels, samples["depth_cm"], samples[column].to_numpy(dtype=float))
    if core.counts is not None:
        total = core.counts[list(core.taxa)].to_numpy(dtype=float).sum(axis=1)
        out["count_sum"] = _placed(levels, core.counts["depth_cm"], total)
    return out


def _record_columns(record, levels: np.ndarray, raw: dict[str, np.ndarray],
                    diagnostics: pd.DataFrame | None) -> dict[str, np.ndarray]:
    values = np.asarray(record.values, dtype=float)
    with quiet_warnings(RuntimeWarning):
        q = np.nanquantile(values, list(VALUE_LEVELS.values()), axis=1) if values.size \
            else np.zeros((len(VALUE_LEVELS), 0))
    stem = calibrated_column_stem(record.variable, record.units, record.proxy)
    out = {f"{stem}_{name}": _placed(levels, record.depth_cm, q[i])
           for i, name in enumerate(VALUE_LEVELS)}
    if record.proxy in raw:
        measured = np.isfinite(raw[record.proxy])
    elif "count_sum" in raw:  # an assemblage record: every counted sample was measured
        measured = raw["count_sum"] > 0
    else:
        measured = np.isin(levels, np.asarray(record.depth_cm, dtype=float))
    out[f"{record.proxy}_uncalibrated"] = measured & ~np.isfinite(out[f"{stem}_median"])
    if record.outside_range is not None:
        outside = np.asarray(record.outside_range, dtype=bool)
        out[f"{record.proxy}_outside_range"] = _placed(levels, record.depth_cm, outside, False, bool)
    if diagnostics is not None and len(diagnostics) and "analogue_quality" in diagnostics:
        rows = diagnostics[diagnostics["proxy"].astype(str) == str(record.proxy)]
        if len(rows):
            quality = _placed(levels, rows["depth_cm"], rows["analogue_quality"].astype(str).to_numpy(),
                              "", object)
            out[f"{record.proxy}_analogue"] = quality
            out[f"{record.proxy}_poor_analogue"] = quality == "none"
    return out


def _descriptions(table: pd.DataFrame, records) -> dict[str, str]:
    fixed = {
        "depth_cm": "composite depth of the sample's mid-point [cm]",
        "thickness_cm": "sample thickness [cm] (empty when not given)",
        "event_free_depth_cm": "depth with the event layers cut out, as used by the age model [cm]",
        "section": "core section", "section_depth_cm": "depth below the section top [cm]",
        "samples_row": "row of the samples file (1-based, header = 1; -1: not in it)",
        "counts_row": "row of the counts file (1-based, header = 1; -1: not in it)",
        "age_median_cal_bp": "median age [cal BP]",
        "age_q160_cal_bp": "68 % range of the age, young end (16 % quantile) [cal BP]",
        "age_q840_cal_bp": "68 % range of the age, old end (84 % quantile) [cal BP]",
        "age_q025_cal_bp": "95 % range of the age, young end (2.5 % quantile) [cal BP]",
        "age_q975_cal_bp": "95 % range of the age, old end (97.5 % quantile) [cal BP]",
        "in_event_layer": "the sample lies inside an event layer (instantaneous deposit)",
        "event_layer_kind": "kind of that event layer",
        "count_sum": "total count of the assemblage sample",
    }
    out = {c: fixed[c] for c in table.columns if c in fixed}
    for record in records:
        stem = calibrated_column_stem(record.variable, record.units, record.proxy)
        what = f"{record.variable} [{record.units}] calibrated from {record.proxy} ({record.method})"
        out[f"{stem}_median"] = f"median of {what}"
        out[f"{stem}_q025"] = f"2.5 % quantile of {what}"
        out[f"{stem}_q975"] = f"97.5 % quantile of {what}"
        out[f"{record.proxy}_uncalibrated"] = f"{record.proxy} measured but no calibrated value"
        out[f"{record.proxy}_outside_range"] = (f"{record.proxy} or its calibrated value lies outside "
                                                "the range the equation was calibrated on")
        out[f"{record.proxy}_analogue"] = "closeness of the nearest modern analogue (good | fair | none)"
        out[f"{record.proxy}_poor_analogue"] = "no close modern analogue in the training set"
    for column in table.columns:
        out.setdefault(column, "raw value as given in the samples file")
    return {c: out[c] for c in table.columns}


def dated_sample_table(core, chronology, calibration=None) -> DatedSamples:
    """Every sample of a core with its depth, age, raw proxies, calibrated values and flags.

    Parameters
    ----------
    core : proxies.cores.Core
        ``samples``, ``counts``, ``event_layers`` and ``depth_scale`` are used.
    chronology : object with ``age_at(depth_cm) -> ndarray (k, M)`` [cal BP]
    calibration : CalibrationResult, optional
        ``records`` (``CalibratedRecord``: ``proxy, variable, units, method, depth_cm (n,),
        values (n, M)``) and ``diagnostics`` (analogue quality per counts sample); ``None``
        when nothing was calibrated.

    Returns
    -------
    DatedSamples
        The table (columns in the module docstring's order) and a description of every column.
    """
    levels = _levels(core.samples, core.counts)
    columns = _bookkeeping(core, levels)
    columns.update(_age_columns(chronology, levels))
    columns.update(_event_layer_columns(core, levels))
    raw = _raw_columns(core, levels)
    columns.update(raw)
    records = list(getattr(calibration, "records", []) or []) if calibration is not None else []
    diagnostics = getattr(calibration, "diagnostics", None) if calibration is not None else None
    for record in records:
        columns.update(_record_columns(record, levels, raw, diagnostics))
    table = pd.DataFrame(columns)
    return DatedSamples(table, _descriptions(table, records))
