"""Dates taken over a depth interval: a constraint on the interval's mean age.

A date measured on a slice from depth ``top`` to ``bottom`` dates material spread over the
slice, so it constrains the *mean* age of the slice, not the age at one depth. The
accumulation models put a node at the slice's top (node k) and bottom (node k + 1) and none
inside, and join nodes by straight lines, so the mean age of the slice is exactly
``(a_k + a_{k+1}) / 2``. The date's likelihood is then a potential on the interval (k, k + 1)
rather than on a node, and the chain stays a chain: the transition of that interval becomes

    T(i -> j) = kernel(j - i) * E(i + j),

with ``E(s)`` the product of the likelihoods of the dates on that interval evaluated at the
mean age ``origin + s * step / 2`` (a half-cell grid; ``s = i + j``). This is exact on the
discretised model (the same forward filtering, backward sampling and evidence), only the
interval's transition is no longer a convolution and is summed lag by lag here. The
half-cell likelihoods are held as mass per model cell (the width of a cell of the node
grid), so a slice's date weighs like a point date.

References
----------
Carter CK, Kohn R (1994). On Gibbs sampling for state space models. Biometrika 81(3),
541-553. doi:10.1093/biomet/81.3.541
"""

from __future__ import annotations

import numpy as np

__all__ = ["half_cell_mass", "shift_with_potential", "pull_with_potential", "span_outlier_posterior",
           "span_outlier_posteriors"]


def half_cell_mass(on_grid, origin: float, step: float, size: int) -> np.ndarray:
    """Mass per model cell at the 2G - 1 half-cell ages ``origin + s step / 2``.

    Parameters
    ----------
    on_grid : callable
        ``on_grid(origin, step, size)`` -> (n, size) mass per cell of width ``step`` centred
        on ``origin + c step`` (e.g. :meth:`CalibratedDates.on_grid`).
    origin, step : float
        Node grid: centre of cell 0 [cal BP] and step [yr].
    size : int
        Number G of node-grid cells.

    Returns
    -------
    ndarray, shape (n, 2G - 1)
        Even entries are the node-grid masses, odd entries the masses of cells of the same
        width centred half-way between.
    """
    whole = on_grid(origin, step, size)
    out = np.empty((whole.shape[0], 2 * size - 1))
    out[:, 0::2] = whole
    if size > 1:
        out[:, 1::2] = on_grid(origin + step / 2, step, size - 1)
    return out


#: kernel cells below this probability are skipped in the lagged sums (the mass dropped is
#: below J x 1e-15 per interval: round-off level)
_KERNEL_CUT = 1e-15


def _rows_by_length(values: np.ndarray, kernels: np.ndarray):
    """Broadcast (..., W) values and (..., J) kernels to rows, sorted longest kernel first.

    Returns the leading shape, the sorted value rows (R, W) and kernel rows (R, J), the
    order (to undo the sort) and each sorted row's kernel length above the cut.
    """
    lead = np.broadcast_shapes(values.shape[:-1], kernels.shape[:-1])
    rows_values = np.broadcast_to(values, lead + values.shape[-1:]).reshape(-1, values.shape[-1])
    rows_kernel = np.broadcast_to(kernels, lead + kernels.shape[-1:]).reshape(-1, kernels.shape[-1])
    above = rows_kernel >= _KERNEL_CUT
    length = np.where(above.any(axis=1), rows_kernel.shape[1] - np.argmax(above[:, ::-1], axis=1), 0)
    order = np.argsort(-length, kind="stable")
    return lead, rows_values[order], rows_kernel[order], order, length[order]


def _live_rows(length: np.ndarray, lags: int, width: int):
    """(lag t, rows whose kernel reaches t) for t = 0 .., rows sorted longest first."""
    live = length.size
    for t in range(min(lags, width)):
        while live and length[live - 1] <= t:
            live -= 1
        if not live:
            return
        yield t, live


def shift_with_potential(alpha: np.ndarray, kernels: np.ndarray, potential: np.ndarray, lo: int,
                         size: int) -> np.ndarray:
    """``out[..., j] = sum_i alpha[..., i] kernels[..., j - i] potential[i + j]``.

    Summed lag by lag over the rows whose kernel still holds mass at that lag (rows sorted by
    kernel length), so the cost is the sum of the kernels' lengths times the window.

    Parameters
    ----------
    alpha : ndarray, shape (..., W)
        Distribution over the cells ``lo .. lo + W - 1`` of the node grid.
    kernels : ndarray, shape (..., J)
        Increment kernels (broadcast against ``alpha``'s leading axes).
    potential : ndarray, shape (2G - 1,)
        Interval potential by half-cell index ``i + j`` (absolute cells).
    lo : int
        Absolute cell of ``alpha[..., 0]``.
    size : int
        Number G of node-grid cells (mass beyond the last cell is lost).

    Returns
    -------
    ndarray, shape (..., min(W + J - 1, G - lo))
        Over the cells ``lo ..``.
    """
    width_in, lags = alpha.shape[-1], kernels.shape[-1]
    width = min(width_in + lags - 1, size - lo)
    dtype = np.result_type(alpha, kernels)
    lead, rows_alpha, rows_kernel, order, length = _rows_by_length(alpha, kernels)
    potential = potential.astype(dtype)
    out = np.zeros((order.size, width), dtype=dtype)
    for t, live in _live_rows(length, lags, width):
        n = min(width_in, width - t)
        weight = potential[2 * lo + t: 2 * lo + t + 2 * n: 2]
        out[:live, t: t + n] += rows_alpha[:live, :n] * rows_kernel[:live, t: t + 1] * weight
    result = np.empty_like(out)
    result[order] = out
    return result.reshape(lead + (width,))


def pull_with_potential(values: np.ndarray, kernels: np.ndarray, potential: np.ndarray) -> np.ndarray:
    """``out[..., i] = sum_t kernels[..., t] potential[2 i + t] values[..., i + t]`` (backward message).

    ``values`` (..., G) on the whole node grid, ``kernels`` (..., J); returns (..., G).
    """
    size, lags = values.shape[-1], kernels.shape[-1]
    lead, rows_values, rows_kernel, order, length = _rows_by_length(values, kernels)
    out = np.zeros((order.size, size))
    for t, live in _live_rows(length, lags, size):
        n = size - t
        out[:live, :n] += rows_kernel[:live, t: t + 1] * potential[t: t + 2 * n: 2] * rows_values[:live, t: t + n]
    result = np.empty_like(out)
    result[order] = out
    return result.reshape(lead + (size,))


def span_outlier_posterior(filtered: np.ndarray, kernel: np.ndarray, potential: np.ndarray,
                           share: np.ndarray, below: np.ndarray) -> float:
    """Posterior outlier probability of one date on an interval (one hyper-parameter point).

    The joint posterior of the interval's end cells is proportional to
    ``filtered(i) kernel(j - i) potential(i + j) below(j)``; the date's outlier probability
    is its average of ``share(i + j) = p o(m) / L(m)``.

    Parameters
    ----------
    filtered : ndarray, shape (G,)
        Filtered distribution of the top node (dates at nodes above included).
    kernel : ndarray, shape (J,)
    potential : ndarray, shape (2G - 1,)
        Product of the likelihoods of every date on the interval.
    share : ndarray, shape (2G - 1,)
        The date's outlier share of its own likelihood at each half-cell.
    below : ndarray, shape (G,)
        Likelihood at the bottom node times its backward message.
    """
    size = filtered.size
    numerator = denominator = 0.0
    for t in np.flatnonzero(kernel[:size] >= _KERNEL_CUT):
        n = size - t
        joint = filtered[:n] * kernel[t] * potential[t: t + 2 * n: 2] * below[t: t + n]
        denominator += float(joint.sum())
        numerator += float(np.dot(joint, share[t: t + 2 * n: 2]))
    return numerator / max(denominator, 1e-300)


def span_outlier_posteriors(problem, filtered, beta, like, kernels, edges) -> np.ndarray:
    """Exact outlier probability of each span date of an accumulation problem (NaN for points).

    One hyper-parameter point: ``filtered`` and ``beta`` (K, G) its filtered distributions
    and backward messages, ``like`` (K, G) the node likelihoods, ``kernels`` its (J_k,) rows,
    ``edges`` the interval potentials.
    """
    out = np.full(len(problem.date_node), np.nan)
    spans = np.flatnonzero(problem.spans())
    shares = problem.span_outlier_shares() if spans.size else None
    for d in spans:
        k = int(problem.date_node[d])
        out[d] = span_outlier_posterior(filtered[k], kernels[k], edges[k], shares[d], like[k + 1] * beta[k + 1])
    return out
