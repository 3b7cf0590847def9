"""Cross-validation of transfer functions and their skill per number of components.

Every scheme returns out-of-sample predictions of shape (n_samples, A) where A is the number
of components (WA-PLS) or 1 (WA, MAT), so one pass gives the skill of every component.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from sklearn.base import clone

from .mat import MAT
from .skill import r_squared
from .wapls import WAPLS

__all__ = [
    "component_predictions", "loo_predictions", "kfold_predictions", "hblock_predictions",
    "bootstrap_predictions", "BootstrapResult", "great_circle_km", "skill_by_components",
    "choose_n_components", "largest_segment_bias", "SCHEMES",
]

SCHEMES = ("loo", "kfold", "bootstrap", "hblock")
EARTH_RADIUS_KM = 6371.0  # mean Earth radius (IUGG), common practice


def component_predictions(model, X):
    """Predictions of a fitted model for every component, shape (n_samples, A)."""
    if isinstance(model, WAPLS):
        return model.predict_components(X)
    return np.asarray(model.predict(X), dtype=float)[:, None]


def _n_outputs(estimator):
    return int(estimator.n_components) if isinstance(estimator, WAPLS) else 1


def _predict_held_out(estimator, X, y, train_masks):
    """Fit on each training mask, predict the samples outside it that the mask is for."""
    out = np.full((X.shape[0], _n_outputs(estimator)), np.nan)
    for test, train in train_masks:
        model = clone(estimator).fit(X[train], y[train])
        out[test] = component_predictions(model, X[test])
    return out


def loo_predictions(estimator, X, y):
    """Leave-one-out predictions, shape (n_samples, A).

    MAT uses a fast path (all distances at once, the sample itself excluded).
    """
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    if isinstance(estimator, MAT):
        return clone(estimator).fit(X, y).predict_excluding("self")[:, None]
    n = X.shape[0]
    masks = ((np.array([i]), np.arange(n) != i) for i in range(n))
    return _predict_held_out(estimator, X, y, masks)


def kfold_predictions(estimator, X, y, n_folds, rng):
    """k-fold predictions with folds drawn at random from ``rng``, shape (n_samples, A)."""
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    n = X.shape[0]
    if not 2 <= n_folds <= n:
        raise ValueError(f"n_folds must be between 2 and {n}, got {n_folds}")
    fold = np.empty(n, dtype=int)
    fold[rng.permutation(n)] = np.arange(n) % n_folds
    masks = ((np.flatnonzero(fold == f), fold != f) for f in range(n_folds))
    return _predict_held_out(estimator, X, y, masks)


def great_circle_km(latitude, longitude):
    """Great-circle distances between all pairs of sites [km] (haversine), shape (n, n)."""
    lat = np.radians(np.asarray(latitude, dtype=float))
    lon = np.radians(np.asarray(longitude, dtype=float))
    dlat = lat[:, None] - lat[None, :]
    dlon = lon[:, None] - lon[None, :]
    h = np.sin(dlat / 2) ** 2 + np.cos(lat)[:, None] * np.cos(lat)[None, :] * np.sin(dlon / 2) ** 2
    return 2.0 * EARTH_RADIUS_KM * np.arcsin(np.sqrt(np.clip(h, 0.0, 1.0)))


def hblock_predictions(estimator, X, y, latitude, longitude, h_km):
    """h-block predictions: each sample predicted without every site within ``h_km`` of it.

    Guards against optimistic errors from spatially autocorrelated training sets.

    References
    ----------
    Telford, R. J. & Birks, H. J. B. (2009). Evaluation of transfer functions in spatially
    structured environments. Quaternary Science Reviews 28, 1309-1316.
    doi:10.1016/j.quascirev.2008.12.020
    """
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    excluded = great_circle_km(latitude, longitude) <= h_km  # includes the sample itself
    if isinstance(estimator, MAT):
        return clone(estimator).fit(X, y).predict_excluding(excluded)[:, None]
    masks = ((np.array([i]), ~excluded[i]) for i in range(X.shape[0]))
    return _predict_held_out(estimator, X, y, masks)


@dataclass(frozen=True)
class BootstrapResult:
    """Bootstrap cross-validation (Birks et al. 1990).

    Attributes
    ----------
    predictions : ndarray (n_train, A)
        Mean out-of-bag prediction of each training sample.
    s1 : ndarray (A,)
        Root mean of the per-sample variances of the out-of-bag predictions.
    s2 : ndarray (A,)
        Root mean square of (mean out-of-bag prediction - observed).
    rmsep : ndarray (A,)
        ``sqrt(s1^2 + s2^2)``.
    new_predictions, new_errors : ndarray (n_new, A) or None
        Mean bootstrap prediction of new (fossil) samples and their sample-specific errors
        ``sqrt(s1_j^2 + s2^2)``.
    """

    predictions: np.ndarray
    s1: np.ndarray
    s2: np.ndarray
    rmsep: np.ndarray
    new_predictions: np.ndarray | None = None
    new_errors: np.ndarray | None = None


def bootstrap_predictions(estimator, X, y, n_cycles, rng, X_new=None):
    """Bootstrap cross-validation with sample-specific errors for new samples.

    In each cycle the training set is resampled with replacement, the model fitted to the
    resample predicts the samples left out (out-of-bag) and the new samples.

    References
    ----------
    Birks, H. J. B., Line, J. M., Juggins, S., Stevenson, A. C. & ter Braak, C. J. F. (1990).
    Phil. Trans. R. Soc. B 327, 263-278. doi:10.1098/rstb.1990.0062
    """
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    n = X.shape[0]
    A = _n_outputs(estimator)
    sums = np.zeros((n, A))
    squares = np.zeros((n, A))
    counts = np.zeros(n)
    if X_new is not None:
        X_new = np.asarray(X_new, dtype=float)
        new_sum = np.zeros((X_new.shape[0], A))
        new_sq = np.zeros((X_new.shape[0], A))
        both = np.vstack([X, X_new])
    for _ in range(int(n_cycles)):
        idx = rng.integers(0, n, n)
        oob = np.ones(n, dtype=bool)
        oob[idx] = False
        model = clone(estimator).fit(X[idx], y[idx])
        pred = component_predictions(model, both if X_new is not None else X)
        train_pred = pred[:n]
        sums[oob] += train_pred[oob]
        squares[oob] += train_pred[oob] ** 2
        counts[oob] += 1
        if X_new is not None:
            new_sum += pred[n:]
            new_sq += pred[n:] ** 2
    seen = counts > 1
    mean = np.full((n, A), np.nan)
    mean[seen] = sums[seen] / counts[seen, None]
    var = np.full((n, A), np.nan)
    var[seen] = np.maximum(squares[seen] / counts[seen, None] - mean[seen] ** 2, 0.0)
    s1 = np.sqrt(np.nanmean(var, axis=0))
    s2 = np.sqrt(np.nanmean((mean - y[:, None]) ** 2, axis=0))
    rmsep = np.sqrt(s1 ** 2 + s2 ** 2)
    new_mean = new_err = None
    if X_new is not None:
        new_mean = new_sum / n_cycles
        new_var = np.maximum(new_sq / n_cycles - new_mean ** 2, 0.0)
        new_err = np.sqrt(new_var + s2[None, :] ** 2)
    return BootstrapResult(mean, s1, s2, rmsep, new_mean, new_err)


def largest_segment_bias(observed, predicted, n_segments=10) -> float:
    """Largest mean residual (predicted - observed) over equal-width segments of the
    observed gradient, signed (Birks 1998, common practice: 10 segments)."""
    o = np.asarray(observed, dtype=float)
    r = np.asarray(predicted, dtype=float) - o
    ok = np.isfinite(r)
    o, r = o[ok], r[ok]
    if o.size == 0:
        return float("nan")
    edges = np.linspace(o.min(), o.max(), n_segments + 1)
    segment = np.clip(np.searchsorted(edges, o, side="right") - 1, 0, n_segments - 1)
    means = [r[segment == s].mean() for s in range(n_segments) if np.any(segment == s)]
    return float(means[int(np.argmax(np.abs(means)))])


def skill_by_components(observed, apparent, predicted, rmsep=None, n_segments=10):
    """Apparent and cross-validated skill per number of components, side by side.

    Parameters
    ----------
    observed : ndarray (n,)
    apparent : ndarray (n, A)
        Predictions of the model fitted to all samples.
    predicted : ndarray (n, A)
        Cross-validated predictions.
    rmsep : ndarray (A,) or None
        Use this RMSEP (e.g. the bootstrap ``sqrt(s1^2 + s2^2)``) instead of the RMS error of
        ``predicted``.

    Returns
    -------
    pandas.DataFrame
        ``n_components``, then each statistic apparent beside cross-validated:
        ``rmse_apparent, rmsep, r2_apparent, r2_cv``, the cross-validated biases
        ``mean_bias_cv, segment_bias_cv`` (residuals are predicted - observed; the segment
        bias is the largest mean residual over ``n_segments`` equal ranges of the observed
        values) and ``rmsep_vs_fewer_percent`` (change of RMSEP against one component fewer).
    """
    o = np.asarray(observed, dtype=float)
    rows = []
    for a in range(apparent.shape[1]):
        ok = np.isfinite(predicted[:, a])
        resid = predicted[ok, a] - o[ok]
        this_rmsep = float(np.sqrt(np.mean(resid ** 2))) if rmsep is None else float(rmsep[a])
        rows.append({
            "n_components": a + 1,
            "rmse_apparent": float(np.sqrt(np.mean((apparent[:, a] - o) ** 2))),
            "rmsep": this_rmsep,
            "r2_apparent": r_squared(o, apparent[:, a]),
            "r2_cv": r_squared(o[ok], predicted[ok, a]),
            "mean_bias_cv": float(resid.mean()),
            "segment_bias_cv": largest_segment_bias(o, predicted[:, a], n_segments),
        })
    table = pd.DataFrame(rows)
    table["rmsep_vs_fewer_percent"] = 100.0 * table["rmsep"].pct_change()
    return table


def choose_n_components(skill: pd.DataFrame, min_improvement=0.05) -> int:
    """Smallest number of components after which one more does not cut RMSEP by at least
    ``min_improvement`` (a fraction; 5 % after Birks 1998).

    References
    ----------
    Birks, H. J. B. (1998). Numerical tools in palaeolimnology - progress, potentialities,
    and problems. J. Paleolimnol. 20, 307-332. doi:10.1023/A:1008038808690
    """
    rmsep = skill["rmsep"].to_numpy()
    chosen = 1
    for a in range(1, rmsep.size):
        if rmsep[a] <= (1.0 - min_improvement) * rmsep[chosen - 1]:
            chosen = a + 1
        else:
            break
    return chosen
