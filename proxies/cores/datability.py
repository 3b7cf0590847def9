"""Can this core be dated at all, and do its grids fit in memory? Checked before any work.

Both ``downcore check`` and the chronology stage of ``downcore run`` call these functions,
so that what check passes, run can date, and what run refuses, check has already named.

Rules
-----
- age control: an age-depth model needs at least two controls at distinct depths -- the
  dates not excluded, plus the core top when ``[chronology] core_top`` is on. With fewer,
  any chronology would be an assumed accumulation rate, not a measurement (the rate itself
  is estimated from the dates).
- event layers must leave some of the core: when every sample lies inside event layers,
  nothing is left on the event-free depth scale to date or reconstruct.
- memory: the largest arrays a setting implies (calibration grid x dates, output depths x
  members, reconstruction grid x members) are estimated up front from the core and the
  settings; one that would exceed the memory limit given (the machine's) is refused naming
  the key, instead of failing with MemoryError part-way.
"""

from __future__ import annotations

import math
import os

import numpy as np

from proxies.problems import Problem

__all__ = ["age_control_problems", "event_layer_problems", "grid_memory_problems", "machine_memory_bytes",
           "BYTES_PER_VALUE"]

#: bytes of one float64 value
BYTES_PER_VALUE = 8
#: an array is refused when it would need more than this share of the memory limit
MEMORY_SHARE = 0.5
#: calendar span covered by a date's calibration window either side of its age [sigma]
_WINDOW_SIGMAS = 5.0


def machine_memory_bytes() -> float:
    """Physical memory of this machine [bytes] (16 GiB when the system does not say)."""
    try:
        return float(os.sysconf("SC_PHYS_PAGES") * os.sysconf("SC_PAGE_SIZE"))
    except (ValueError, OSError, AttributeError):
        return 16.0 * 2**30


def _dates_file(core) -> str:
    files = getattr(core, "files", None) or {}
    return files.get("dates") or f"{getattr(core, 'folder', '') or getattr(core, 'id', '?')}/dates.csv"


def _toml_file(core) -> str:
    folder = getattr(core, "folder", "") or ""
    return f"{folder}/core.toml" if folder else "core.toml"


def age_control_problems(core, core_top: bool) -> list[Problem]:
    """Too little age control for any age-depth model (see the module notes)."""
    dates = core.dates
    used = dates.loc[~dates["exclude"].astype(bool)]
    depths = set(np.round(used["depth_cm"].to_numpy(float), 9))
    if core_top:
        depths.add(0.0)
    if len(depths) >= 2:
        return []
    file = _dates_file(core)
    n_excluded = int(dates["exclude"].astype(bool).sum())
    if len(used) == 0 and n_excluded:
        message = (f"every date is excluded ({n_excluded} of {len(dates)})"
                   + (": only the core top is left" if core_top else ""))
        fix = "set exclude = false for the dates to use (an age model needs two age controls)"
        return [Problem(file, message, fix, column="exclude")]
    what = "one date" if len(used) == 1 else "dates at a single depth"
    top = "the core top is at that depth" if core_top else "[chronology] core_top = false"
    return [Problem(file, f"{what} and no other age control ({top}): the age model would rest on an "
                          "assumed accumulation rate", "add a second date at another depth, or set "
                    "[chronology] core_top = true to use the core top", column="depth_cm")]


def event_layer_problems(core) -> list[Problem]:
    """Event layers that remove every sample of the core."""
    layers = getattr(core, "event_layers", ()) or ()
    if not layers:
        return []
    depth = core.samples["depth_cm"].to_numpy(float)
    inside = np.zeros(depth.shape, dtype=bool)
    for layer in layers:
        inside |= (depth >= layer.top_cm) & (depth <= layer.bottom_cm)
    if depth.size and inside.all():
        return [Problem(_toml_file(core), f"the event layers cover every sample ({depth.size} samples, "
                                          f"{depth.min():g}-{depth.max():g} cm): nothing is left to date",
                        "check the event layer depths and depth_unit in [[event_layers]]",
                        column="event_layers")]
    return []


def _need(cells: float) -> float:
    return cells * BYTES_PER_VALUE


def _refuse(where: str, key: str, value, cells: float, what: str, limit_bytes: float) -> Problem:
    need = _need(cells) / 2**30
    return Problem(where, f"{key} = {value:g} would need about {need:,.1f} GiB for {what} (the limit here is "
                          f"{MEMORY_SHARE * limit_bytes / 2**30:,.1f} GiB)",
                   f"make {key} larger (or leave it out for the default)", column=key)


def grid_memory_problems(core, chronology, reconstruction, ensemble: int, limit_bytes: float,
                         where: str, curve_span_yr: float | None = None) -> list[Problem]:
    """Settings whose grids would not fit in memory for this core.

    Parameters
    ----------
    core : Core
    chronology : ChronologySettings or None
    reconstruction : ReconstructionSettings or None
    ensemble : int
        Members M.
    limit_bytes : float
        Memory available [bytes]; an array above :data:`MEMORY_SHARE` of it is refused.
    where : str
        How problems name the run config (``"<config> [chronology]"``).
    curve_span_yr : float, optional
        Calendar span of the longest curve [yr] (radiocarbon dates are calibrated over it).
    """
    budget = MEMORY_SHARE * limit_bytes
    dates = core.dates
    ages = dates["age"].to_numpy(float)
    errors = dates["error"].to_numpy(float)
    calendar = dates["kind"].astype(str).to_numpy() == "calendar"
    span = float(np.ptp(np.r_[ages[calendar] + _WINDOW_SIGMAS * errors[calendar],
                              ages[calendar] - _WINDOW_SIGMAS * errors[calendar], 0.0]))
    if (~calendar).any() and curve_span_yr:
        span = max(span, float(curve_span_yr))
    length_cm = float(np.nanmax(np.r_[core.samples["depth_cm"].to_numpy(float), dates["depth_cm"].to_numpy(float)]))
    problems = []
    if chronology is not None:
        step = chronology.calibration_step_yr
        cells = len(dates) * (span / step + 1)
        if _need(cells) > budget:
            problems.append(_refuse(f"{where} [chronology]", "calibration_step_yr", step, cells,
                                    f"{len(dates)} date densities over {span:,.0f} yr", limit_bytes))
        step = chronology.output_step_cm
        cells = (length_cm / step + 1) * ensemble * 2
        if _need(cells) > budget:
            problems.append(_refuse(f"{where} [chronology]", "output_step_cm", step, cells,
                                    f"{length_cm:g} cm x {ensemble} members", limit_bytes))
        if chronology.grid_step_yr:
            spacing = getattr(chronology, "node_spacing_cm", None)
            nodes = min(length_cm / spacing if spacing else math.inf, chronology.max_nodes) + len(dates)
            cells = nodes * (span / chronology.grid_step_yr + 1)
            if _need(cells) > budget:
                problems.append(_refuse(f"{where} [chronology]", "grid_step_yr", chronology.grid_step_yr, cells,
                                        f"{nodes:.0f} nodes over {span:,.0f} yr", limit_bytes))
    step = getattr(reconstruction, "grid_step_yr", None) if reconstruction is not None else None
    # a radiocarbon age is at most ~1.3 x older in calendar years over the last 55 kyr
    span = float(np.nanmax(np.abs(ages) + _WINDOW_SIGMAS * errors)) * 1.3 if ages.size else 0.0
    if step:
        n_proxies = max(1, len(core.proxy_columns) + (1 if getattr(core, "counts", None) is not None else 0))
        cells = (span / step + 1) * ensemble * n_proxies * 2
        if math.isfinite(cells) and _need(cells) > budget:
            problems.append(_refuse(f"{where} [reconstruction]", "grid_step_yr", step, cells,
                                    f"{span:,.0f} yr x {ensemble} members x {n_proxies} proxies", limit_bytes))
    return problems
