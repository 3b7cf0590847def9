"""Bayesian accumulation age-depth model, solved exactly as a hidden Markov chain.

Model (our own formulation of the gamma accumulation-rate models of Blaauw & Christen 2011;
see DESIGN.md section 4):

- nodes at depths z_0 < z_1 < ... < z_{K-1} on the event-free depth scale [cm]; the state of
  node k is its calendar age a_k on a regular grid ``origin + j * step`` [cal BP];
- a_0 is uniform over the grid (whose young end is the collection year when known);
- a_{k+1} = a_k + x_k, where the increments are steps of a gamma process: over an interval
  dz the increment is x ~ Gamma(alpha dz / D, mean m dz) [yr], independent between
  intervals, so over the reference interval D (the node spacing) the accumulation rate
  [yr/cm] is Gamma(shape alpha, mean m); across a hiatus x_k gets an additional gap
  ~ Exponential(mean ``gap_mean``) [yr] (a wide gap prior);
- a date d at node k (every date depth is a node) has likelihood
  L_d(a) = (1 - p_d) f_d(a) + p_d o_d(a), with f_d its calibrated density (mass per grid
  cell), p_d its prior outlier probability and o_d a broad outlier density centred on the
  date (mass per grid cell, not renormalised to the grid, so that it does not depend on the
  grid's extent; see :func:`proxies.chronology.outliers.outlier_density`). A date with
  p_d = 0 (the core top) is a plain constraint.

The increments are discretised to grid cells (``P(x in [(t - 1/2) step, (t + 1/2) step))``),
so the transition from node k to k+1 is a discrete convolution, done by FFT. Forward filtering
gives the filtered distributions and the exact marginal likelihood (evidence) of the model;
backward sampling draws exact posterior paths (forward-filtering backward-sampling, Carter &
Kohn 1994; Fruhwirth-Schnatter 1994); a backward pass of messages gives each date's exact
posterior outlier probability. Hyper-parameters (mean-rate multiplier x shape) are integrated
over a small grid with weights proportional to the exact evidence (uniform prior over the
grid points). Within a cell, ages are spread uniformly after sampling (then kept monotone).

References
----------
Blaauw M, Christen JA (2011). Flexible paleoclimate age-depth models using an autoregressive
gamma process. Bayesian Analysis 6(3), 457-474. doi:10.1214/11-BA618
Carter CK, Kohn R (1994). On Gibbs sampling for state space models. Biometrika 81(3),
541-553. doi:10.1093/biomet/81.3.541
Fruhwirth-Schnatter S (1994). Data augmentation and dynamic linear models. Journal of Time
Series Analysis 15(2), 183-202. doi:10.1111/j.1467-9892.1994.tb00184.x
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import fft as sp_fft
from scipy import stats

from proxies.chronology.evidence_weights import members_per_point
from proxies.chronology.nodes import place_nodes  # kept importable from here
from proxies.chronology.spans import pull_with_potential, shift_with_potential, span_outlier_posteriors

__all__ = [
    "AccumulationProblem",
    "AccumulationFit",
    "increment_kernel",
    "transition_kernels",
    "forward_filter",
    "backward_messages",
    "sample_paths",
    "fit_accumulation",
    "place_nodes",
]

#: probability cut off beyond the last cell of a discretised increment kernel (memory.py's too)
KERNEL_TAIL = 1e-9


@dataclass(frozen=True, eq=False)
class AccumulationProblem:
    """Everything the chain needs, on arrays.

    Attributes
    ----------
    node_depth_cm : ndarray, shape (K,)
        Node depths on the event-free scale [cm], non-decreasing; a hiatus appears as the
        same depth twice (the age just above and just below it).
    gap_after : ndarray of bool, shape (K - 1,)
        True where the interval from node k to k + 1 crosses a hiatus.
    date_node : ndarray of int, shape (n,)
        Node of each date.
    date_mass : ndarray, shape (n, G)
        Calibrated mass of each date per grid cell (rows sum to <= 1).
    outlier_prior : ndarray, shape (n,)
        Prior outlier probability of each date, in [0, 1).
    outlier_mass : ndarray, shape (n, G), optional
        Outlier density of each date as mass per grid cell; ``None`` means flat over the
        grid (1 / G, kept for small exactness tests only).
    grid_origin : float
        Calendar age of grid cell 0 [cal BP].
    grid_step : float
        Grid step [yr].
    reference_cm : float
        Depth interval over which the gamma shape of the rate prior is stated [cm] (the
        nominal node spacing).
    date_span : ndarray of bool, shape (n,), optional
        True for a date taken over a slice: it constrains the mean age of the interval from
        node ``date_node[d]`` to the next node (see :mod:`proxies.chronology.spans`).
    span_mass, span_outlier_mass : ndarray, shape (n, 2G - 1), optional
        The calibrated and outlier masses of each date at the half-cell ages
        ``grid_origin + s grid_step / 2`` (mass per grid cell; used for the span dates).
    """

    node_depth_cm: np.ndarray
    gap_after: np.ndarray
    date_node: np.ndarray
    date_mass: np.ndarray
    outlier_prior: np.ndarray
    grid_origin: float
    grid_step: float
    reference_cm: float = 10.0
    outlier_mass: np.ndarray | None = None
    date_span: np.ndarray | None = None
    span_mass: np.ndarray | None = None
    span_outlier_mass: np.ndarray | None = None

    @property
    def n_grid(self) -> int:
        return self.date_mass.shape[1]

    @property
    def n_nodes(self) -> int:
        return self.node_depth_cm.size

    def grid(self) -> np.ndarray:
        """Calendar age of each grid cell [cal BP]."""
        return self.grid_origin + self.grid_step * np.arange(self.n_grid)

    def outlier_likelihoods(self) -> np.ndarray:
        """o_d, the outlier part of each date's likelihood (mass per cell), shape (n, G)."""
        if self.outlier_mass is None:
            return np.full(self.date_mass.shape, 1.0 / self.n_grid)
        return self.outlier_mass

    def date_likelihoods(self) -> np.ndarray:
        """L_d = (1 - p_d) f_d + p_d o_d, shape (n, G)."""
        p = self.outlier_prior[:, None]
        return (1.0 - p) * self.date_mass + p * self.outlier_likelihoods()

    def spans(self) -> np.ndarray:
        """True for each date on an interval (a slice), shape (n,)."""
        if self.date_span is None:
            return np.zeros(len(self.date_node), dtype=bool)
        return np.asarray(self.date_span, dtype=bool)

    def span_likelihoods(self) -> np.ndarray:
        """L_d = (1 - p_d) f_d + p_d o_d at the half-cell ages, shape (n, 2G - 1)."""
        p = self.outlier_prior[:, None]
        broad = self.span_outlier_mass
        if broad is None:
            broad = np.full(self.span_mass.shape, 1.0 / self.n_grid)
        return (1.0 - p) * self.span_mass + p * broad

    def span_outlier_shares(self) -> np.ndarray:
        """p_d o_d / L_d at the half-cell ages, shape (n, 2G - 1)."""
        broad = self.span_outlier_mass
        if broad is None:
            broad = np.full(self.span_mass.shape, 1.0 / self.n_grid)
        return self.outlier_prior[:, None] * broad / np.maximum(self.span_likelihoods(), 1e-300)

    def edge_likelihoods(self) -> dict[int, np.ndarray]:
        """Interval k -> product of the likelihoods of its span dates, shape (2G - 1,)."""
        spans = self.spans()
        out: dict[int, np.ndarray] = {}
        if spans.any():
            per = self.span_likelihoods()
            for d in np.flatnonzero(spans):
                k = int(self.date_node[d])
                out[k] = out[k] * per[d] if k in out else per[d].copy()
        return out

    def node_likelihoods(self) -> np.ndarray:
        """Product of the likelihoods of the point dates at each node, shape (K, G)."""
        like = np.ones((self.n_nodes, self.n_grid))
        per_date = self.date_likelihoods()
        for d, (k, span) in enumerate(zip(self.date_node, self.spans())):
            if not span:
                like[k] *= per_date[d]
        return like


@dataclass(frozen=True, eq=False)
class AccumulationFit:
    """Result of :func:`fit_accumulation`.

    Attributes
    ----------
    paths : ndarray, shape (K, M)
        Sampled calendar ages of the nodes [cal BP], member on the last axis.
    outlier_posterior : ndarray, shape (n,)
        Posterior probability that each date is an outlier.
    mean_rates : ndarray, shape (H,)
        Mean accumulation rate of each hyper-parameter point [yr/cm].
    shapes : ndarray, shape (H,)
        Gamma shape of each hyper-parameter point.
    log_evidence : ndarray, shape (H,)
        Log marginal likelihood of each point.
    weights : ndarray, shape (H,)
        Posterior weights of the points (sum to 1).
    members_per_point : ndarray of int, shape (H,)
        How many paths were drawn under each point.
    """

    paths: np.ndarray
    outlier_posterior: np.ndarray
    mean_rates: np.ndarray
    shapes: np.ndarray
    log_evidence: np.ndarray
    weights: np.ndarray
    members_per_point: np.ndarray


def increment_kernel(dz_cm: float, mean_rate: float, shape: float, step: float, reference_cm: float,
                     gap_mean: float | None = None, max_cells: int | None = None) -> np.ndarray:
    """Discretised density of the age increment over ``dz_cm`` [cm].

    The increment is a gamma-process step, x ~ Gamma(shape * dz / reference_cm, mean
    mean_rate * dz) [yr]: over ``reference_cm`` the rate has the stated gamma ``shape`` and
    mean ``mean_rate`` [yr/cm], and increments over adjacent intervals add up consistently
    (the sum of independent gammas with one scale is gamma), so the prior does not depend on
    where nodes are put. With ``gap_mean`` [yr] an exponential gap is added (hiatus). Cell t
    holds P(x in [(t - 1/2) step, (t + 1/2) step)) (cell 0 from 0); the kernel stops where the
    upper tail drops below 1e-9 (or at ``max_cells``) and is renormalised.

    Returns
    -------
    ndarray, shape (J,)
        Probability of an increment of t cells, t = 0..J-1.
    """
    parts = []  # (isf, cdf) pairs; scipy's plain functions avoid frozen-distribution overhead
    if dz_cm > 0:
        local_shape = shape * dz_cm / reference_cm
        scale = mean_rate * dz_cm / local_shape
        parts.append((lambda q: stats.gamma.isf(q, local_shape, scale=scale),
                      lambda x: stats.gamma.cdf(x, local_shape, scale=scale)))
    if gap_mean is not None:
        parts.append((lambda q: stats.expon.isf(q, scale=gap_mean),
                      lambda x: stats.expon.cdf(x, scale=gap_mean)))
    kernel = np.ones(1)
    for isf, cdf in parts:
        cells = int(np.ceil(isf(KERNEL_TAIL) / step)) + 2
        if max_cells is not None:
            cells = min(cells, max_cells)
        edges = (np.arange(cells + 1) - 0.5) * step
        edges[0] = 0.0
        piece = np.diff(cdf(edges))
        kernel = np.convolve(kernel, piece)
    if max_cells is not None:
        kernel = kernel[:max_cells]
    return kernel / kernel.sum()


def transition_kernels(problem: AccumulationProblem, mean_rates, shapes, gap_mean: float) -> list[np.ndarray]:
    """Increment kernels of every interval for every hyper-parameter point.

    Returns
    -------
    list of K - 1 ndarrays, each of shape (H, J_k)
        Row h is the kernel under ``(mean_rates[h], shapes[h])``, zero-padded to the longest.
    """
    mean_rates = np.atleast_1d(np.asarray(mean_rates, dtype=float))
    shapes = np.atleast_1d(np.asarray(shapes, dtype=float))
    dz = np.diff(problem.node_depth_cm)
    cache: dict = {}
    kernels = []
    for width, gap in zip(dz, problem.gap_after):
        key = (round(float(width), 9), bool(gap))
        if key not in cache:
            rows = [increment_kernel(width, m, s, problem.grid_step, problem.reference_cm,
                                     gap_mean if gap else None, max_cells=problem.n_grid)
                    for m, s in zip(mean_rates, shapes)]
            block = np.zeros((len(rows), max(r.size for r in rows)))
            for h, r in enumerate(rows):
                block[h, : r.size] = r
            cache[key] = block
        kernels.append(cache[key])
    return kernels


class _Spectra:
    """FFTs of the kernels, cached per kernel block (intervals of equal length share one)."""

    def __init__(self, kernels: list[np.ndarray], size: int, reverse: bool = False):
        self.size = size
        self.reverse = reverse
        self._cache: dict[int, tuple[int, np.ndarray]] = {}
        self.kernels = kernels

    def get(self, k: int) -> tuple[int, np.ndarray]:
        block = self.kernels[k]
        key = id(block)
        if key not in self._cache:
            n = sp_fft.next_fast_len(self.size + block.shape[1] - 1, real=True)
            values = block[:, ::-1] if self.reverse else block
            self._cache[key] = (n, sp_fft.rfft(values, n, axis=1))
        return self._cache[key]


def _convolve_rows(p: np.ndarray, spectra: _Spectra, k: int, offset: int = 0) -> np.ndarray:
    n, spectrum = spectra.get(k)
    full = sp_fft.irfft(sp_fft.rfft(p, n, axis=1) * spectrum, n, axis=1)
    out = full[:, offset: offset + spectra.size]
    return np.maximum(out, 0.0)  # FFT round-off can leave tiny negatives


def forward_filter(like: np.ndarray, kernels: list[np.ndarray], keep_predicted=(), edges=None):
    """Forward filtering of the chain, for H hyper-parameter points at once.

    Parameters
    ----------
    like : ndarray, shape (K, G)
        Product of date likelihoods at each node.
    kernels : list of K - 1 ndarrays of shape (H, J_k)
        Increment kernels (see :func:`transition_kernels`).
    keep_predicted : iterable of int
        Nodes whose predicted distributions are returned.
    edges : dict of int to ndarray (2G - 1,), optional
        Interval potentials of the span dates (:meth:`AccumulationProblem.edge_likelihoods`).

    Returns
    -------
    filtered : ndarray, shape (H, K, G)
        p(a_k | dates at nodes <= k), each row normalised.
    log_evidence : ndarray, shape (H,)
        log p(all dates); the prior of a_0 is uniform over the grid, and mass pushed beyond
        the oldest grid cell is lost (counts as zero likelihood).
    predicted : dict of int to ndarray (H, G)
        p(a_k | dates at nodes < k) for the nodes in ``keep_predicted``.
    """
    n_nodes, size = like.shape
    n_points = kernels[0].shape[0] if kernels else 1
    keep = set(int(k) for k in keep_predicted)
    spectra = _Spectra(kernels, size)
    filtered = np.empty((n_points, n_nodes, size))
    predicted: dict[int, np.ndarray] = {}
    current = np.full((n_points, size), 1.0 / size)
    log_evidence = np.zeros(n_points)
    with np.errstate(divide="ignore", invalid="ignore"):
        for k in range(n_nodes):
            if k > 0 and edges and k - 1 in edges:
                current = shift_with_potential(filtered[:, k - 1], kernels[k - 1], edges[k - 1], 0, size)
                kept = current.sum(axis=1, keepdims=True)
                log_evidence += np.log(kept[:, 0])
                current = current / kept
            elif k > 0:
                current = _convolve_rows(filtered[:, k - 1], spectra, k - 1)
                kept = current.sum(axis=1, keepdims=True)
                log_evidence += np.log(kept[:, 0])
                current = current / kept
            if k in keep:
                predicted[k] = current
            joint = current * like[k]
            total = joint.sum(axis=1, keepdims=True)
            log_evidence += np.log(total[:, 0])
            filtered[:, k] = joint / np.where(total > 0, total, 1.0)
    log_evidence[~np.isfinite(log_evidence)] = -np.inf
    return filtered, log_evidence, predicted


def backward_messages(like: np.ndarray, kernels: list[np.ndarray], edges=None) -> np.ndarray:
    """Backward messages beta_k(a) proportional to p(dates at nodes > k | a_k = a).

    beta_k(i) = sum_t kernel_k(t) like_{k+1}(i + t) beta_{k+1}(i + t) (a correlation, by FFT),
    each row scaled to max 1; an interval with a span potential E has
    beta_k(i) = sum_t kernel_k(t) E(2i + t) like_{k+1}(i + t) beta_{k+1}(i + t).

    Returns
    -------
    ndarray, shape (H, K, G)
    """
    n_nodes, size = like.shape
    n_points = kernels[0].shape[0] if kernels else 1
    spectra = _Spectra(kernels, size, reverse=True)
    beta = np.empty((n_points, n_nodes, size))
    beta[:, -1] = 1.0
    for k in range(n_nodes - 2, -1, -1):
        w = like[k + 1] * beta[:, k + 1]
        if edges and k in edges:
            message = pull_with_potential(w, kernels[k], edges[k])
        else:
            message = _convolve_rows(w, spectra, k, offset=kernels[k].shape[1] - 1)
        beta[:, k] = message / np.maximum(message.max(axis=1, keepdims=True), 1e-300)
    return beta


def sample_paths(filtered: np.ndarray, kernels: list[np.ndarray], members: int,
                 rng: np.random.Generator, edges=None) -> np.ndarray:
    """Backward sampling of ``members`` exact posterior paths (grid indices), one point.

    a_{K-1} ~ filtered_{K-1}; then p(a_k = i | a_{k+1} = j) is proportional to
    filtered_k(i) kernel_k(j - i) (times E(i + j) on an interval with a span potential E).

    Parameters
    ----------
    filtered : ndarray, shape (K, G)
    kernels : list of K - 1 ndarrays, shape (J_k,)
    edges : dict of int to ndarray (2G - 1,), optional

    Returns
    -------
    ndarray of int, shape (K, members)
    """
    n_nodes, size = filtered.shape
    out = np.empty((n_nodes, members), dtype=np.int64)
    cdf = np.cumsum(filtered[-1])
    out[-1] = np.minimum(np.searchsorted(cdf, rng.random(members) * cdf[-1], side="right"), size - 1)
    for k in range(n_nodes - 2, -1, -1):
        kernel = np.trim_zeros(kernels[k], "b")
        below = out[k + 1]
        candidates = below[:, None] - np.arange(kernel.size)[None, :]
        weights = filtered[k][np.maximum(candidates, 0)] * kernel[None, :]
        if edges and k in edges:
            weights *= edges[k][np.maximum(candidates, 0) + below[:, None]]
        weights[candidates < 0] = 0.0
        cum = np.cumsum(weights, axis=1)
        u = rng.random(members) * cum[:, -1]
        pick = np.minimum((cum < u[:, None]).sum(axis=1), kernel.size - 1)
        out[k] = below - pick
    return out


def _outlier_posterior(problem: AccumulationProblem, predicted, beta, per_date) -> np.ndarray:
    """Exact posterior outlier probability of each date under one hyper-parameter point.

    ``predicted`` maps node -> (G,), ``beta`` is (K, G).
    """
    out = np.zeros(len(problem.date_node))
    p = problem.outlier_prior
    outlier_part = problem.outlier_likelihoods()
    spans = problem.spans()
    for d, k in enumerate(problem.date_node):
        if spans[d]:
            continue
        others = np.ones(problem.n_grid)
        for e in np.flatnonzero((problem.date_node == k) & ~spans):
            if e != d:
                others = others * per_date[e]
        base = predicted[k] * beta[k] * others
        numerator = p[d] * float(np.dot(base, outlier_part[d]))
        out[d] = numerator / max(float(np.dot(base, per_date[d])), 1e-300)
    return out


def fit_accumulation(problem: AccumulationProblem, mean_rates, shapes, gap_mean: float,
                     members: int, rng: np.random.Generator, min_weight: float = 1e-9) -> AccumulationFit:
    """Posterior age paths of the accumulation model, hyper-parameters integrated.

    Parameters
    ----------
    problem : AccumulationProblem
    mean_rates : array_like, shape (H,)
        Mean accumulation rate of each hyper-parameter point [yr/cm].
    shapes : array_like, shape (H,)
        Gamma shape of each point over ``problem.reference_cm`` (same length).
    gap_mean : float
        Mean of the exponential hiatus gap [yr].
    members : int
        Number of paths M.
    rng : numpy.random.Generator
    min_weight : float
        Points with a smaller posterior weight are dropped (weights renormalised); this
        changes outlier probabilities by less than H x ``min_weight``.

    Returns
    -------
    AccumulationFit
    """
    mean_rates = np.asarray(mean_rates, dtype=float)
    shapes = np.asarray(shapes, dtype=float)
    like = problem.node_likelihoods()
    per_date = problem.date_likelihoods()
    edges = problem.edge_likelihoods()
    spans = problem.spans()
    kernels = transition_kernels(problem, mean_rates, shapes, gap_mean)
    date_nodes = np.unique(problem.date_node)
    filtered, log_evidence, predicted = forward_filter(like, kernels, keep_predicted=date_nodes, edges=edges)
    weights, active, counts = members_per_point(log_evidence, members, min_weight, rng)
    weights_active = weights[active] / weights[active].sum()
    paths = np.empty((problem.n_nodes, members))
    outlier = np.zeros(len(problem.date_node))
    sub_kernels = [block[active] for block in kernels]
    if len(problem.date_node):
        beta = backward_messages(like, sub_kernels, edges)
        for j, h in enumerate(active):
            node_predicted = {k: predicted[k][h] for k in date_nodes}
            point = _outlier_posterior(problem, node_predicted, beta[j], per_date)
            if spans.any():
                span = span_outlier_posteriors(problem, filtered[h], beta[j], like, [b[h] for b in kernels], edges)
                point = np.where(spans, span, point)
            outlier += weights_active[j] * point
    column = 0
    for h in active:
        if counts[h]:
            cells = sample_paths(filtered[h], [block[h] for block in kernels], int(counts[h]), rng, edges)
            paths[:, column: column + counts[h]] = problem.grid_origin + problem.grid_step * cells
            column += counts[h]
    # spread ages uniformly within their cell, keeping every path monotone in depth
    paths += (rng.random(paths.shape) - 0.5) * problem.grid_step
    paths = np.maximum.accumulate(paths, axis=0)
    paths = paths[:, rng.permutation(members)]
    return AccumulationFit(paths, outlier, mean_rates, shapes, log_evidence, weights, counts)
