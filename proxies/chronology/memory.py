"""Accumulation with memory: a rate that persists from one depth interval to the next.

Our own exact formulation of an autoregressive accumulation-rate prior in the spirit of
Blaauw & Christen (2011), solved like :mod:`proxies.chronology.accumulation` as a hidden
Markov chain, now with the state (age, rate class) at every node:

- rate classes: with mean rate ``m`` [yr/cm] and variability ``v`` (coefficient of
  variation of the rate), the C classes are equal-probability slices of a gamma
  distribution of the rate, Gamma(shape 1/v^2, mean m): class c has the rate
  ``r_c = m q_c`` with ``q_c`` the gamma's quantile at (c + 1/2) / C, scaled so that the
  classes average exactly ``m``;
- within a class the age increment over an interval dz is a gamma-process step,
  x ~ Gamma(``within_shape`` dz / D, mean r_c dz) [yr], so over the reference depth D the
  rate wanders around r_c with a coefficient of variation 1 / sqrt(within_shape);
- memory: the class of the next interval is the same with probability ``w^(dz / D)`` and
  otherwise drawn afresh from the C classes (each 1 / C), so ``w`` is the persistence over
  D (an AR(1)-like rate process whose stationary law is the class distribution); across a
  hiatus the class is always drawn afresh and an exponential gap (mean ``gap_mean``) is
  added;
- node 0: age uniform over the grid, class uniform.

The transition shifts the ages of each class by that class's increment kernel (an FFT
convolution per class) and then mixes the classes (a rank-one update, exact). Forward
filtering gives the exact evidence of every hyper-parameter point (mean rate x variability
x memory), which weights the points (prior: uniform over the mean rates and variabilities,
a beta density over the memories, ``memory_prior``; uniform for (1, 1)); backward sampling
draws exact paths: the class of node k given node k+1's age and class, then its age given its
class. A date taken over a slice constrains the slice's mean age, a potential on the
interval between its end nodes (:mod:`proxies.chronology.spans`): that interval's shift is
then summed lag by lag instead of by FFT, and the age draw of its top node is weighted by the
potential; every step stays exact. A date's outlier probability is the Rao-Blackwell average of
``p_d o_d(a) / L_d(a)`` over the sampled paths (exact given each path; Monte Carlo over paths).

References
----------
Blaauw & Christen (2011) for the autoregressive gamma process, Carter & Kohn (1994) for the
forward-filtering backward-sampling: full entries in :mod:`proxies.chronology.accumulation`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import fft as sp_fft
from scipy import stats

from proxies.chronology.accumulation import KERNEL_TAIL, AccumulationProblem
from proxies.chronology.evidence_weights import members_per_point
from proxies.chronology.spans import shift_with_potential

__all__ = ["MemoryFit", "rate_classes", "class_kernels", "memory_forward", "fit_memory", "memory_log_prior"]


@dataclass(frozen=True, eq=False)
class MemoryFit:
    """Result of :func:`fit_memory`.

    Attributes
    ----------
    paths : ndarray, shape (K, M)
        Sampled node ages [cal BP].
    outlier_posterior : ndarray, shape (n,)
        Posterior outlier probability of each date.
    mean_rates, variabilities, memories : ndarray, shape (H,)
        The hyper-parameter points: mean rate [yr/cm], coefficient of variation of the rate
        classes, persistence over the reference depth.
    log_evidence, weights : ndarray, shape (H,)
        Exact log evidence and posterior weight (sum 1) of each point.
    members_per_point : ndarray of int, shape (H,)
    """

    paths: np.ndarray
    outlier_posterior: np.ndarray
    mean_rates: np.ndarray
    variabilities: np.ndarray
    memories: np.ndarray
    log_evidence: np.ndarray
    weights: np.ndarray
    members_per_point: np.ndarray


def rate_classes(variability: float, classes: int) -> np.ndarray:
    """Relative rates q_c of C equal-probability classes of Gamma(1/v^2, mean 1), mean 1.

    Parameters
    ----------
    variability : float
        Coefficient of variation v of the rate (> 0).
    classes : int
        Number of classes C.
    """
    shape = 1.0 / variability**2
    q = stats.gamma.ppf((np.arange(classes) + 0.5) / classes, shape, scale=1.0 / shape)
    return q / q.mean()


def _gamma_cells(mean: np.ndarray, shape: float, step: float, cells: int) -> np.ndarray:
    """Discretised Gamma(shape, mean) per row (cell t: [(t - 1/2) step, (t + 1/2) step))."""
    edges = (np.arange(cells + 1) - 0.5) * step
    edges[0] = 0.0
    cdf = stats.gamma.cdf(edges[None, :], shape, scale=(mean / shape)[:, None])
    return np.diff(cdf, axis=1)


def class_kernels(dz_cm: float, rates: np.ndarray, within_shape: float, reference_cm: float, step: float,
                  gap_mean: float | None, max_cells: int) -> np.ndarray:
    """Increment kernel of every rate over ``dz_cm`` [cm]: shape (R, J), rows sum to 1.

    ``rates`` (R,) [yr/cm]; with ``gap_mean`` [yr] an exponential gap is convolved in.
    """
    rates = np.asarray(rates, dtype=float)
    if dz_cm > 0:
        local = within_shape * dz_cm / reference_cm
        top = stats.gamma.isf(KERNEL_TAIL, local, scale=rates.max() * dz_cm / local)
        cells = min(int(np.ceil(top / step)) + 2, max_cells)
        kernel = _gamma_cells(rates * dz_cm, local, step, cells)
    else:
        kernel = np.ones((rates.size, 1))
    if gap_mean is not None:
        cells = min(int(np.ceil(stats.expon.isf(KERNEL_TAIL, scale=gap_mean) / step)) + 2, max_cells)
        edges = (np.arange(cells + 1) - 0.5) * step
        edges[0] = 0.0
        gap = np.diff(stats.expon.cdf(edges, scale=gap_mean))
        n = sp_fft.next_fast_len(kernel.shape[1] + gap.size - 1, real=True)
        kernel = sp_fft.irfft(sp_fft.rfft(kernel, n, axis=1) * sp_fft.rfft(gap, n), n, axis=1)
        kernel = np.maximum(kernel[:, : kernel.shape[1] + gap.size - 1], 0.0)
    kernel = kernel[:, :max_cells]
    return kernel / kernel.sum(axis=1, keepdims=True)


class _Transitions:
    """Class kernels and their spectra per distinct interval, for a set of rates (R, C)."""

    def __init__(self, problem: AccumulationProblem, rates: np.ndarray, within_shape: float, gap_mean: float):
        self.problem, self.rates, self.within_shape, self.gap_mean = problem, rates, within_shape, gap_mean
        self._kernels: dict = {}
        self._spectra: dict = {}
        self.dz = np.diff(problem.node_depth_cm)

    def _key(self, k: int):
        return (round(float(self.dz[k]), 9), bool(self.problem.gap_after[k]))

    def kernel(self, k: int) -> np.ndarray:
        """Kernels (R, C, J) of interval k (rows sum to 1)."""
        key = self._key(k)
        if key not in self._kernels:
            flat = class_kernels(self.dz[k], self.rates.ravel(), self.within_shape, self.problem.reference_cm,
                                 self.problem.grid_step, self.gap_mean if key[1] else None, self.problem.n_grid)
            self._kernels[key] = flat.reshape(self.rates.shape + (flat.shape[1],))
        return self._kernels[key]

    def spectra(self, k: int, n: int, dtype=np.float64) -> np.ndarray:
        """rfft of the kernels of interval k at FFT length n, shape (R, C, n // 2 + 1)."""
        key = self._key(k) + (n, np.dtype(dtype).str)
        if key not in self._spectra:
            self._spectra[key] = sp_fft.rfft(self.kernel(k).astype(dtype), n, axis=-1)
        return self._spectra[key]

    def persistence(self, k: int, memories: np.ndarray) -> np.ndarray:
        """Probability of keeping the class over interval k, per memory value."""
        if self.problem.gap_after[k]:
            return np.zeros_like(memories)
        return memories ** (self.dz[k] / self.problem.reference_cm)


#: cells whose mass is below this share of the largest cell are dropped from the window; the
#: mass lost is below G x 1e-15 of the total (round-off level)
_WINDOW_CUT = 1e-15


def _window(mass: np.ndarray) -> tuple[int, int]:
    """First and last cell (inclusive) of the last axis holding mass above the cut."""
    profile = mass.reshape(-1, mass.shape[-1]).max(axis=0)
    keep = np.flatnonzero(profile > _WINDOW_CUT * profile.max())
    return int(keep[0]), int(keep[-1])


def memory_forward(problem: AccumulationProblem, transitions: _Transitions, rate_index: np.ndarray,
                   memories: np.ndarray, keep: bool = False, dtype=np.float64):
    """Forward filtering on the (age, class) state for P hyper-parameter points at once.

    The distributions are carried on the window of cells where they hold mass (ages are
    restricted to where the filtered mass is), so the cost follows the age uncertainty
    rather than the length of the grid.

    Parameters
    ----------
    rate_index : ndarray of int, shape (P,)
        Row of ``transitions.rates`` (the (mean rate, variability) pair) of each point.
    memories : ndarray, shape (P,)
        Persistence of each point.
    keep : bool
        Also return, per node, the filtered and (from node 1) the shifted distributions as
        ``(first cell, array (P, C, W))`` windows, for backward sampling.
    dtype : numpy dtype
        Precision of the distributions and FFTs; single precision (used for the evidence of
        the whole hyper-parameter grid) keeps the log evidence to about 1e-4.

    Returns
    -------
    log_evidence : ndarray, shape (P,)
    filtered, shifted : list or None
    """
    like = problem.node_likelihoods().astype(dtype)
    edges = problem.edge_likelihoods()
    n_nodes, size = like.shape
    classes = transitions.rates.shape[1]
    points = rate_index.size
    lo, alpha = 0, np.full((points, classes, size), 1.0 / (size * classes), dtype=dtype)
    memories = memories.astype(dtype)
    log_evidence = np.zeros(points)
    filtered, shifted_all = ([], []) if keep else (None, None)
    with np.errstate(divide="ignore", invalid="ignore"):
        for k in range(n_nodes):
            if k > 0 and k - 1 in edges:
                kernels = transitions.kernel(k - 1)[rate_index].astype(dtype)
                shifted = shift_with_potential(alpha, kernels, edges[k - 1], lo, size)
            elif k > 0:
                kernels = transitions.kernel(k - 1)
                width = min(alpha.shape[-1] + kernels.shape[-1] - 1, size - lo)
                # one FFT length per interval (whatever the window), so the kernel spectra are reused
                n = sp_fft.next_fast_len(size + kernels.shape[-1] - 1, real=True)
                spectra = transitions.spectra(k - 1, n, dtype)[rate_index]
                shifted = sp_fft.irfft(sp_fft.rfft(alpha, n, axis=-1) * spectra, n, axis=-1)[..., :width]
                shifted = np.maximum(shifted, 0.0)
            if k > 0:
                if keep:
                    shifted_all.append((lo, shifted))
                stay = transitions.persistence(k - 1, memories)[:, None, None]
                alpha = stay * shifted + (1.0 - stay) * shifted.sum(axis=1, keepdims=True) / classes
            alpha = alpha * like[k, lo: lo + alpha.shape[-1]]
            total = alpha.sum(axis=(1, 2))
            log_evidence += np.log(total.astype(float))
            if not np.any(total > 0):
                break
            alpha = alpha / np.where(total > 0, total, 1.0)[:, None, None]
            first, last = _window(alpha)
            alpha = alpha[..., first: last + 1]
            lo += first
            if keep:
                filtered.append((lo, alpha))
    log_evidence[~np.isfinite(log_evidence)] = -np.inf
    return log_evidence, filtered, shifted_all


def _draw(weights: np.ndarray, rng) -> np.ndarray:
    """One index per row of ``weights`` (R, J), proportional to the row."""
    cum = np.cumsum(weights, axis=1)
    u = rng.random(weights.shape[0]) * cum[:, -1]
    return np.minimum((cum < u[:, None]).sum(axis=1), weights.shape[1] - 1)


def _sample(filtered, shifted, transitions: _Transitions, rate_row: int, memory: float, members: int, rng,
            edges=None):
    """Backward sampling of (age cell, class) paths for one hyper-parameter point.

    ``filtered`` and ``shifted`` are the windows of :func:`memory_forward` (one point);
    ``edges`` the interval potentials of the span dates.
    """
    edges = edges or {}
    n_nodes = len(filtered)
    ages = np.empty((n_nodes, members), dtype=np.int64)
    lo, last = filtered[-1]
    width = last.shape[-1]
    cdf = np.cumsum(last[0].reshape(-1))
    flat = np.minimum(np.searchsorted(cdf, rng.random(members) * cdf[-1], side="right"), cdf.size - 1)
    cls, ages[-1] = flat // width, lo + flat % width
    rows = np.arange(members)
    for k in range(n_nodes - 2, -1, -1):
        kernels = transitions.kernel(k)[rate_row]  # (C, J)
        stay = float(transitions.persistence(k, np.array([memory]))[0])
        below = ages[k + 1]
        s_lo, s_win = shifted[k]
        moved = s_win[0][:, below - s_lo].T  # (members, C): shifted_k(a_{k+1}, c)
        move = moved * ((1.0 - stay) / moved.shape[1])
        move[rows, cls] += stay * moved[rows, cls]
        cls = _draw(move, rng)
        # age of node k given its class: filtered_k(i, c) kernel_c(a_{k+1} - i); members are
        # taken class by class so that only the lags where that class's kernel lives are scanned
        f_lo, f_win = filtered[k]
        for c in np.unique(cls):
            who = np.flatnonzero(cls == c)
            kernel = kernels[c]
            support = np.flatnonzero(kernel > 0)
            lags = np.arange(support[0], support[-1] + 1)
            candidates = below[who, None] - lags[None, :]
            inside = (candidates >= f_lo) & (candidates < f_lo + f_win.shape[-1])
            weights = f_win[0, c][np.clip(candidates - f_lo, 0, f_win.shape[-1] - 1)] * kernel[lags][None, :]
            if k in edges:
                weights *= edges[k][np.maximum(candidates, 0) + below[who, None]]
            weights[~inside] = 0.0
            ages[k, who] = candidates[np.arange(who.size), _draw(weights, rng)]
    return ages


def fit_memory(problem: AccumulationProblem, mean_rates, variabilities, memories, gap_mean: float,
               members: int, rng: np.random.Generator, classes: int = 8, within_shape: float = 16.0,
               min_weight: float = 1e-6, memory_prior: tuple[float, float] = (1.0, 1.0)) -> MemoryFit:
    """Posterior age paths of the memory model, every hyper-parameter integrated.

    Parameters
    ----------
    problem : AccumulationProblem
        Nodes, dates and grid; ``reference_cm`` is the reference depth D [cm].
    mean_rates, variabilities, memories : array_like
        The grid of each hyper-parameter (their outer product is integrated): mean rate
        [yr/cm], coefficient of variation of the rate classes, persistence over D.
    gap_mean : float
        Mean of the exponential hiatus gap [yr].
    members : int
        Number of paths M.
    rng : numpy.random.Generator
    classes : int
        Number of rate classes C.
    within_shape : float
        Gamma shape of the rate within a class over D.
    min_weight : float
        Points below this posterior weight are not sampled (weights renormalised).
    memory_prior : (float, float)
        Shapes (a, b) of the beta prior over the memory w: the grid point w_j gets prior weight
        proportional to the beta density at w_j, w_j^(a-1) (1-w_j)^(b-1), normalised over the
        memory grid (the grid as quadrature nodes of the continuous prior); (1, 1) is a uniform
        prior over the points.

    Returns
    -------
    MemoryFit
    """
    m_grid = np.asarray(mean_rates, dtype=float)
    v_grid = np.asarray(variabilities, dtype=float)
    w_grid = np.asarray(memories, dtype=float)
    relative = np.stack([rate_classes(v, classes) for v in v_grid])  # (V, C)
    rates = (m_grid[:, None, None] * relative[None, :, :]).reshape(-1, classes)  # (M*V, C)
    transitions = _Transitions(problem, rates, within_shape, gap_mean)
    mi, vi, wi = np.meshgrid(np.arange(m_grid.size), np.arange(v_grid.size), np.arange(w_grid.size), indexing="ij")
    rate_index = (mi * v_grid.size + vi).ravel()
    point_memory = w_grid[wi.ravel()]
    log_evidence, _, _ = memory_forward(problem, transitions, rate_index, point_memory, dtype=np.float32)
    log_prior = memory_log_prior(w_grid, *memory_prior)[wi.ravel()]
    weights, _, counts = members_per_point(log_evidence, members, min_weight, rng, log_prior=log_prior)
    edges = problem.edge_likelihoods()
    cells = np.empty((problem.n_nodes, members), dtype=np.int64)
    column = 0
    for h in np.flatnonzero(counts):
        _, filtered, shifted = memory_forward(problem, transitions, rate_index[[h]], point_memory[[h]], keep=True)
        cells[:, column: column + counts[h]] = _sample(filtered, shifted, transitions, rate_index[h],
                                                       point_memory[h], int(counts[h]), rng, edges)
        column += counts[h]
    outlier = _outlier_average(problem, cells)
    paths = problem.grid_origin + problem.grid_step * cells.astype(float)
    paths += (rng.random(paths.shape) - 0.5) * problem.grid_step
    paths = np.maximum.accumulate(paths, axis=0)
    paths = paths[:, rng.permutation(members)]
    return MemoryFit(paths, outlier, m_grid[mi.ravel()], v_grid[vi.ravel()], point_memory, log_evidence,
                     weights, counts)


def memory_log_prior(memories: np.ndarray, a: float, b: float) -> np.ndarray:
    """Log prior weight of each memory grid point under a Beta(a, b) prior, normalised to sum 1.

    The weight of w_j is the beta density at w_j over the sum of the densities at the grid
    points (a and b >= 1 keep the density finite on [0, 1)); Beta(1, 1) gives equal weights.
    """
    log_density = stats.beta.logpdf(np.asarray(memories, dtype=float), a, b)
    if not np.any(np.isfinite(log_density)):
        raise ValueError(f"the Beta({a:g}, {b:g}) prior over the memory gives no weight to any of the "
                         f"memories tried {list(np.atleast_1d(memories))}; add a memory between 0 and 1")
    return log_density - np.logaddexp.reduce(log_density)


def _outlier_average(problem: AccumulationProblem, cells: np.ndarray) -> np.ndarray:
    """Rao-Blackwell outlier probability: mean over paths of p_d o_d(a) / L_d(a).

    For a span date, a is the mean age of its interval (half-cell index a_k + a_{k+1}).
    """
    if not len(problem.date_node):
        return np.zeros(0)
    at = cells[problem.date_node]  # (n, M)
    rows = np.arange(len(problem.date_node))[:, None]
    broad = problem.outlier_likelihoods()[rows, at]
    total = problem.date_likelihoods()[rows, at]
    share = problem.outlier_prior[:, None] * broad / np.maximum(total, 1e-300)
    spans = np.flatnonzero(problem.spans())
    if spans.size:
        mean_cell = cells[problem.date_node[spans]] + cells[problem.date_node[spans] + 1]
        share[spans] = problem.span_outlier_shares()[spans[:, None], mean_cell]
    return share.mean(axis=1)
