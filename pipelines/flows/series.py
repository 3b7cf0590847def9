"""Stage runner of a dated series (``[series.<name>]`` of the run config).

The series' table (and age ensemble, when given) is read and put on the grid as the
reconstruction of a one-record "core" named after the series
(:func:`proxies.reconstruction.dated.dated_series_result`); the flow then treats that entry as
a core's reconstruction: its events are detected by the events stage, it enters the stack and
the run-level events and lead/lag tables, and its folder ``<name>/`` holds
``reconstruction.parquet``, ``reconstruction_ensemble.parquet`` and the event tables.
"""

from __future__ import annotations

import pathlib

from pipelines.flows.plan import RunPlan
from pipelines.flows.stages import _cached_or_build, _collect_warnings, reconstruction_entry
from pipelines.flows.store import WorkStore
from proxies.seeding import rng_for

__all__ = ["run_series", "SERIES_STREAM"]

#: random stream stage name of the dated series (``rng_for(run_seed, "series", name)``)
SERIES_STREAM = "series"


def run_series(plan: RunPlan, store: WorkStore, key: str, recompute: bool, *, name: str) -> dict:
    """Read one dated series and write it as a reconstruction (entry ``core_id`` = ``name``)."""

    def produce(staged: pathlib.Path) -> dict:
        from pipelines.series_inputs import read_series, series_specs
        from proxies.reconstruction.dated import dated_series_result

        spec = series_specs(plan.config)[name]
        read = read_series(plan.config, name, spec)
        with _collect_warnings() as caught:
            result = dated_series_result(name, read.table.age_yr, read.table.value,
                                         rng_for(plan.run_seed, SERIES_STREAM, name), plan.settings["reconstruction"],
                                         plan.ensemble, spec.age_sd_yr, spec.age_sd_fraction, read.member_ages,
                                         spec.grid_step_yr, spec.variable, spec.units)
        return reconstruction_entry(staged, result, caught)

    return _cached_or_build(store, "series", key, produce, {"core_id": name}, recompute)
