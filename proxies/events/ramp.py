"""Ramp regression for climate transitions (Mudelsee 2000).

The ramp is ``x(t) = x1`` for ``t <= t1``, ``x1 + (t - t1)(x2 - x1)/(t2 - t1)`` for
``t1 < t < t2`` and ``x2`` for ``t >= t2`` (Mudelsee 2000, Eq. 1). For fixed change times the
levels ``x1, x2`` are linear least squares; ``t1, t2`` are found by brute-force search over
the sample times (Mudelsee 2000, Sect. 2). Here the two-column normal equations are built
from cumulative sums, so that every (t1, t2) pair costs O(1), and the search runs for a whole
batch of series (ensemble members, bootstrap replicates) at once, each with its own window.

Times run forward (older first, i.e. decreasing cal BP); :mod:`proxies.events.stage` converts.

References
----------
Mudelsee, M. (2000). Ramp function regression: a tool for quantifying climate transitions.
Computers & Geosciences 26, 293-307. doi:10.1016/S0098-3004(99)00141-7
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["RampFit", "fit_ramps", "fit_ramp", "ramp_curve", "ramp_bootstrap", "ramp_location_draws"]


@dataclass(frozen=True)
class RampFit:
    """Least-squares ramp(s); arrays of shape (B,) for a batch, floats for one series.

    Attributes
    ----------
    t1, t2 : start and end of the ramp [time units of the input]
    x1, x2 : levels before and after [units of x]
    i1, i2 : indices of t1 and t2 in the time axis
    rss : residual sum of squares in the window
    """

    t1: np.ndarray
    t2: np.ndarray
    x1: np.ndarray
    x2: np.ndarray
    i1: np.ndarray
    i2: np.ndarray
    rss: np.ndarray

    @property
    def duration(self):
        """``t2 - t1`` [time units]."""
        return self.t2 - self.t1

    @property
    def amplitude(self):
        """``x2 - x1`` [units of x]."""
        return self.x2 - self.x1


def ramp_curve(t: np.ndarray, t1: float, t2: float, x1: float, x2: float) -> np.ndarray:
    """The ramp function of Mudelsee (2000, Eq. 1) at times ``t``."""
    t = np.asarray(t, dtype=float)
    frac = np.clip((t - t1) / (t2 - t1), 0.0, 1.0)
    return x1 + frac * (x2 - x1)


def _prefix(a: np.ndarray) -> np.ndarray:
    return np.concatenate([np.zeros((1,) + a.shape[1:]), np.cumsum(a, axis=0)])


def fit_ramps(t: np.ndarray, x: np.ndarray, start: np.ndarray | None = None,
              stop: np.ndarray | None = None, max_points: int = 80) -> RampFit:
    """Brute-force least-squares ramps for a batch of series, each in its own window.

    Parameters
    ----------
    t : ndarray (T,)
        Increasing times shared by the batch.
    x : ndarray (T, B)
        Series (no NaN inside the windows).
    start, stop : ndarray of int (B,), optional
        First and last index (inclusive) of each window; default the whole series.
    max_points : int
        Windows longer than this are cut symmetrically about their centre [points]; bounds
        the work at ``max_points^2 / 2`` pairs per series.

    Returns
    -------
    RampFit with arrays of shape (B,)
    """
    t = np.asarray(t, dtype=float)
    x = np.asarray(x, dtype=float)
    if x.ndim == 1:
        x = x[:, None]
    n_t, n_b = x.shape
    start = np.zeros(n_b, dtype=np.int64) if start is None else np.asarray(start, dtype=np.int64).copy()
    stop = np.full(n_b, n_t - 1, dtype=np.int64) if stop is None else np.asarray(stop, dtype=np.int64).copy()
    if np.any(stop - start < 1):
        raise ValueError("each ramp window needs at least two points")
    too_long = stop - start + 1 > max_points
    centre = (start + stop) // 2
    start[too_long] = centre[too_long] - max_points // 2
    stop[too_long] = start[too_long] + max_points - 1
    width = int((stop - start).max())
    p, q = np.triu_indices(width + 1, k=1)  # offsets of t1 < t2 within a window
    i1 = start[None, :] + p[:, None]        # (P, B)
    i2 = start[None, :] + q[:, None]
    valid = i2 <= stop[None, :]
    i1 = np.minimum(i1, n_t - 1)
    i2 = np.minimum(i2, n_t - 1)
    cols = np.arange(n_b)[None, :]
    c_x, c_xx = _prefix(x), _prefix(x * x)
    c_tx = _prefix(t[:, None] * x)
    c_t, c_tt = _prefix(t), _prefix(t * t)
    a0, e1 = start[None, :], stop[None, :] + 1
    # Region A: a0..i1 (level x1); region B: i2..stop (level x2); ramp interior i1+1..i2-1.
    n_a = (i1 - a0 + 1).astype(float)
    n_b_ = (e1 - i2).astype(float)
    sx_a = c_x[i1 + 1, cols] - c_x[a0, cols]
    sx_b = c_x[e1, cols] - c_x[i2, cols]
    n_r = (i2 - i1 - 1).astype(float)
    st_r = c_t[i2] - c_t[i1 + 1]
    stt_r = c_tt[i2] - c_tt[i1 + 1]
    sx_r = c_x[i2, cols] - c_x[i1 + 1, cols]
    stx_r = c_tx[i2, cols] - c_tx[i1 + 1, cols]
    # Pairs outside a window (masked by `valid`) may divide by zero; they are discarded.
    with np.errstate(divide="ignore", invalid="ignore"):
        ta, length = t[i1], t[i2] - t[i1]
        su = (st_r - n_r * ta) / length
        suu = (stt_r - 2 * ta * st_r + n_r * ta * ta) / length ** 2
        sux = (stx_r - ta * sx_r) / length
        g11 = n_a + n_r - 2 * su + suu
        g12 = su - suu
        g22 = n_b_ + suu
        b1 = sx_a + sx_r - sux
        b2 = sx_b + sux
        det = g11 * g22 - g12 * g12
        explained = (g22 * b1 * b1 - 2 * g12 * b1 * b2 + g11 * b2 * b2) / det
        explained = np.where(valid & np.isfinite(explained), explained, -np.inf)
    k = np.argmax(explained, axis=0)
    pick = (k, np.arange(n_b))
    total = c_xx[e1[0], np.arange(n_b)] - c_xx[start, np.arange(n_b)]
    x1 = (g22 * b1 - g12 * b2)[pick] / det[pick]
    x2 = (g11 * b2 - g12 * b1)[pick] / det[pick]
    j1, j2 = i1[pick], i2[pick]
    return RampFit(t[j1], t[j2], x1, x2, j1, j2, total - explained[pick])


def fit_ramp(t: np.ndarray, x: np.ndarray, max_points: int | None = None) -> RampFit:
    """Least-squares ramp of one series over its whole length (Mudelsee 2000).

    Parameters
    ----------
    t : ndarray (n,) increasing times
    x : ndarray (n,)
    max_points : int, optional
        Default: all points.

    Returns
    -------
    RampFit with float attributes
    """
    t = np.asarray(t, dtype=float)
    fit = fit_ramps(t, np.asarray(x, dtype=float)[:, None], max_points=max_points or t.size)
    return RampFit(*(np.asarray(v)[0].item() for v in (fit.t1, fit.t2, fit.x1, fit.x2,
                                                      fit.i1, fit.i2, fit.rss)))


def ramp_bootstrap(t: np.ndarray, x: np.ndarray, n_boot: int, rng: np.random.Generator,
                   level: float = 0.95) -> dict[str, tuple[float, float, float]]:
    """Ramp fit with residual-bootstrap percentile intervals (after Mudelsee 2000, Sect. 3).

    Residuals of the fitted ramp are resampled with replacement (assumes serially
    uncorrelated noise; for red noise use the ensemble or an AR(1) surrogate instead), added
    to the fitted ramp, and the ramp is refitted to every replicate.

    Parameters
    ----------
    t, x : ndarray (n,)
    n_boot : int
        Bootstrap replicates.
    rng : numpy.random.Generator
    level : float
        Interval probability.

    Returns
    -------
    dict
        ``name -> (estimate, lower, upper)`` for ``t1, t2, duration, x1, x2, amplitude``.
    """
    t = np.asarray(t, dtype=float)
    x = np.asarray(x, dtype=float)
    fit = fit_ramp(t, x)
    fitted = ramp_curve(t, fit.t1, fit.t2, fit.x1, fit.x2)
    resid = x - fitted
    draws = fitted[:, None] + rng.choice(resid, size=(t.size, n_boot), replace=True)
    boot = fit_ramps(t, draws, max_points=t.size)
    tail = (1 - level) / 2
    out = {}
    for name in ("t1", "t2", "duration", "x1", "x2", "amplitude"):
        values = np.asarray(getattr(boot, name))
        lo, hi = np.quantile(values, [tail, 1 - tail])
        out[name] = (float(getattr(fit, name)), float(lo), float(hi))
    return out


def ramp_location_draws(t: np.ndarray, x: np.ndarray, fit: RampFit, start: np.ndarray, stop: np.ndarray,
                        persistence: float, rng: np.random.Generator, max_points: int = 80) -> tuple:
    """One parametric AR(1) bootstrap draw of the change times of each fitted ramp.

    Each series' fitted ramp plus AR(1) red noise (lag-one coefficient ``persistence`` per
    sample, marginal SD that of the fit's residuals) is refitted in the same window; the
    draw is the basic-bootstrap value ``2 t_hat - t*`` (Davison & Hinkley 1997, Sect. 5.2;
    from memory), which carries the change point's location uncertainty under red noise and
    removes the estimator's own bias (in red noise a sharp step is fitted as a ramp that
    starts too early and ends too late). Over an ensemble, one draw per member combines
    this with the spread of the members' ages.

    Parameters
    ----------
    t : ndarray (T,)
        Monotonic times (either direction, as :func:`fit_ramps` is given them).
    x : ndarray (T, B)
        The fitted series (used for the residual SD).
    fit : RampFit
        Of ``x`` in the windows ``start..stop`` (:func:`fit_ramps`).
    start, stop : ndarray of int (B,)
        The windows of ``fit``.
    persistence : float
        AR(1) coefficient per sample of the noise, in [0, 1).
    rng : numpy.random.Generator
    max_points : int
        As :func:`fit_ramps`.

    Returns
    -------
    (t1, t2) : ndarray (B,), ndarray (B,)
        Drawn start and end [time units], not necessarily on the sample times.
    """
    t = np.asarray(t, dtype=float)
    n_t, n_b = x.shape
    if n_b == 0:
        return np.zeros(0), np.zeros(0)
    length = fit.t2 - fit.t1
    length = np.where(length != 0, length, 1.0)
    frac = np.clip((t[:, None] - fit.t1[None, :]) / length[None, :], 0.0, 1.0)
    fitted = fit.x1[None, :] + frac * (fit.x2 - fit.x1)[None, :]
    inside = (np.arange(n_t)[:, None] >= start[None, :]) & (np.arange(n_t)[:, None] <= stop[None, :])
    n_in = np.maximum(inside.sum(axis=0) - 4, 1)
    sd = np.sqrt(np.sum(np.where(inside, (x - fitted) ** 2, 0.0), axis=0) / n_in)
    a = float(np.clip(persistence, 0.0, 0.999))
    e = rng.standard_normal((n_t, n_b))
    noise = np.empty_like(e)
    noise[0] = e[0]
    for i in range(1, n_t):
        noise[i] = a * noise[i - 1] + np.sqrt(1.0 - a * a) * e[i]
    again = fit_ramps(t, fitted + sd[None, :] * noise, start, stop, max_points)
    return 2.0 * fit.t1 - again.t1, 2.0 * fit.t2 - again.t2
