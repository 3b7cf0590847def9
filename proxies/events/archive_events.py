"""Run-level event tables: every core's events with archive-wide FDR control, and the
lead/lag of events found in several cores.

:func:`run_event_tables` takes the per-core event results of a run and returns the two
run-level tables (``archive_events.parquet``, ``lead_lag.parquet``):

- :func:`proxies.events.fdr.archive_event_table` -- Benjamini-Hochberg ``q_value`` beside
  each ``p_value`` over all cores x variables, and ``survives_fdr``;
- :func:`proxies.events.leadlag.lead_lag_table` -- for each event found (``significant``) in
  several cores, the member-wise lead/lag of every pair of those cores.
"""

from __future__ import annotations

import pandas as pd

from proxies.events.fdr import archive_event_table
from proxies.events.leadlag import lead_lag_table
from proxies.events.settings import EventSettings

__all__ = ["run_event_tables"]


def run_event_tables(results: dict, settings: EventSettings) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The run-level events and lead/lag tables.

    Parameters
    ----------
    results : dict
        core id -> :class:`proxies.events.stage.EventResult`.
    settings : EventSettings
        ``alpha`` (per-series level and FDR level), ``lead_lag_window_yr``,
        ``lead_lag_group`` (variables taken as one event).

    Returns
    -------
    (archive_events, lead_lag) : DataFrame, DataFrame
    """
    searched = sum(int(r.probability["variable"].nunique()) for r in results.values() if len(r.probability))
    archive = archive_event_table({cid: r.events for cid, r in results.items()}, settings.alpha, searched)
    onsets = [r.onsets.assign(core_id=cid) for cid, r in sorted(results.items()) if len(r.onsets)]
    onsets = pd.concat(onsets, ignore_index=True) if onsets else pd.DataFrame(
        columns=["core_id", "event_id", "member", "onset_cal_bp"])
    groups = {v: "+".join(settings.lead_lag_group) for v in settings.lead_lag_group or ()}
    found = archive[archive["significant"]].reset_index(drop=True)
    return archive, lead_lag_table(found, onsets, settings.lead_lag_window_yr, groups)
