"""Where the accumulation models put their nodes: a regular ladder plus the dated depths.

References
----------
Blaauw M, Christen JA (2011). Flexible paleoclimate age-depth models using an autoregressive
gamma process. Bayesian Analysis 6(3), 457-474. doi:10.1214/11-BA618
"""

from __future__ import annotations

import numpy as np

__all__ = ["place_nodes", "span_nodes"]


def place_nodes(top_cm: float, bottom_cm: float, spacing_cm: float, date_depths_cm,
                hiatus_depths_cm=(), spans_cm=()) -> tuple[np.ndarray, np.ndarray]:
    """Node depths: a regular ladder plus every date depth, and each hiatus twice.

    Ladder nodes closer than a third of the spacing to a date depth are left out (the date's
    node takes their place), so dates do not split intervals into slivers.

    Parameters
    ----------
    top_cm, bottom_cm : float
        Range to cover [cm, event-free].
    spacing_cm : float
        Regular node spacing [cm].
    date_depths_cm : array_like
        Date depths [cm, event-free]; each becomes a node, so a date's likelihood acts on
        exactly one node (no interpolation between nodes).
    hiatus_depths_cm : array_like
        Hiatus depths [cm, event-free].
    spans_cm : sequence of (top, bottom)
        Depth intervals of dates taken over a slice [cm, event-free]: both ends become nodes
        and no ladder node is put inside (the caller keeps other nodes out of them).

    Returns
    -------
    node_depth_cm : ndarray, shape (K,)
    gap_after : ndarray of bool, shape (K - 1,)
    """
    if not spacing_cm > 0:
        raise ValueError(f"node spacing must be positive, got {spacing_cm}")
    ladder = np.arange(top_cm, bottom_cm + spacing_cm * 0.999, spacing_cm)
    hiatus = np.asarray(sorted(h for h in hiatus_depths_cm if top_cm < h < bottom_cm), dtype=float)
    ends = np.asarray(spans_cm, dtype=float).reshape(-1, 2)
    dated = np.unique(np.concatenate([np.asarray(date_depths_cm, dtype=float), ends.ravel()]))
    if dated.size:
        # a ladder node within a third of the spacing of a date gives way to the date's node
        nearest = np.min(np.abs(ladder[:, None] - dated[None, :]), axis=1)
        ladder = ladder[nearest >= spacing_cm / 3]
    for top, bottom in ends:
        ladder = ladder[(ladder <= top) | (ladder >= bottom)]
    depths = np.unique(np.concatenate([ladder, [top_cm, bottom_cm], dated, hiatus]))
    # merge nodes closer than 1e-6 cm
    depths = depths[np.concatenate([[True], np.diff(depths) > 1e-6])]
    depths = np.sort(np.concatenate([depths, hiatus]))
    gap_after = np.zeros(depths.size - 1, dtype=bool)
    for h in hiatus:
        k = int(np.searchsorted(depths, h - 1e-9, side="left"))
        gap_after[k] = True
    return depths, gap_after


def span_nodes(node_depth_cm: np.ndarray, spans_cm) -> np.ndarray:
    """Node at the top of each interval (the interval runs to the next node).

    A top at a hiatus takes the node just below it. Raises ``ValueError`` when the next node
    is not the interval's bottom (a node inside it).
    """
    out = []
    for top, bottom in np.asarray(spans_cm, dtype=float).reshape(-1, 2):
        k = int(np.searchsorted(node_depth_cm, top + 1e-6, side="right")) - 1
        if k + 1 >= node_depth_cm.size or abs(node_depth_cm[k + 1] - bottom) > 1e-6 or abs(node_depth_cm[k] - top) > 1e-6:
            raise ValueError(f"the interval {top:g}-{bottom:g} cm holds a node inside; spans must not overlap")
        out.append(k)
    return np.asarray(out, dtype=np.int64)
