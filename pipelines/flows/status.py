"""The status word of a core that finished (did not fail): what its results are worth.

``ok``      every reconstructed record has values over at least ``min_filled_share`` of its
            age span ([reconstruction], default 0.5);
``thin``    the core was reconstructed, but some record is empty or mostly empty (below
            ``min_filled_share``): look at its notes and warnings before using it;
``dated``   dates and age-depth model only: no proxy was calibrated (no ``[calibration]``
            section applies to the core, or its proxies have no usable values), so there is
            no reconstruction;
``failed``  (set by the flow) a stage failed; the summary's ``error`` says which and why.

Only ``failed`` makes ``downcore run`` exit with 3; ``thin`` and ``dated`` cores finished.
"""

from __future__ import annotations

__all__ = ["STATUSES", "RECONSTRUCTED", "finished_status"]

#: every status a summary row can carry, best first
STATUSES = ("ok", "thin", "dated", "failed")

#: statuses of cores whose reconstruction enters the regional stack
RECONSTRUCTED = ("ok", "thin")


def finished_status(entries: dict[str, dict]) -> str:
    """Status of a core that did not fail, from its finished stage entries.

    Parameters
    ----------
    entries : dict
        Stage name -> work-store entry of the stages the core finished (the reconstruction
        entry carries ``n_series`` and ``thin``, the list of thin records).

    Returns
    -------
    str
        ``"ok"``, ``"thin"`` or ``"dated"`` (see the module docstring).
    """
    reconstruction = entries.get("reconstruction")
    if reconstruction is None:
        return "dated"
    if not reconstruction.get("n_series") or reconstruction.get("thin"):
        return "thin"
    return "ok"
