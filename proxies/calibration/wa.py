"""Weighted averaging (WA) regression and calibration as a scikit-learn estimator."""

from __future__ import annotations

import numpy as np
from sklearn.base import BaseEstimator, RegressorMixin
from sklearn.utils.validation import check_is_fitted, validate_data

__all__ = ["AbundanceRegressor", "WA", "wa_optima", "wa_tolerances", "row_profiles", "hill_n2",
           "n2_corrected_tolerances"]


def row_profiles(X):
    """Rows divided by their totals (proportions); rows with a zero total become NaN."""
    totals = X.sum(axis=1, keepdims=True)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(totals > 0, X / np.where(totals > 0, totals, 1.0), np.nan)


def wa_optima(X, y):
    """Taxon optima ``u_k = sum_i x_ik y_i / sum_i x_ik`` (NaN for absent taxa).

    References
    ----------
    Birks, H. J. B., Line, J. M., Juggins, S., Stevenson, A. C. & ter Braak, C. J. F. (1990).
    Diatoms and pH reconstruction. Phil. Trans. R. Soc. B 327, 263-278.
    doi:10.1098/rstb.1990.0062
    """
    totals = X.sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(totals > 0, (X.T @ y) / np.where(totals > 0, totals, 1.0), np.nan)


def wa_tolerances(X, y, optima):
    """Taxon tolerances ``t_k = sqrt(sum_i x_ik (y_i - u_k)^2 / sum_i x_ik)``.

    Birks et al. (1990), without the small-sample (N2) correction.
    """
    totals = X.sum(axis=0)
    # sum_i x_ik (y_i - u_k)^2 = X^T y^2 - 2 u X^T y + u^2 totals, written without cancellation
    squared = np.einsum("ik,ik->k", X, (y[:, None] - np.nan_to_num(optima)[None, :]) ** 2)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(totals > 0, np.sqrt(squared / np.where(totals > 0, totals, 1.0)), np.nan)


#: default floor of the N2-corrected tolerances, as a percentile of them (our choice: with the
#: median, ten two-occurrence noise taxa still cost 10-20 % of the leave-one-out RMSEP in the
#: simulations of tests/test_transfer_significance.py; the upper quartile keeps it within 1 %)
TOLERANCE_FLOOR_PERCENTILE = 75.0


def hill_n2(X):
    """Hill's N2 of every taxon over the samples: ``N2_k = 1 / sum_i (x_ik / sum_i x_ik)^2``,
    the effective number of occurrences (NaN for absent taxa).

    References
    ----------
    Hill, M. O. (1973). Diversity and evenness: a unifying notation and its consequences.
    Ecology 54, 427-432. doi:10.2307/1934352
    """
    X = np.asarray(X, dtype=float)
    totals = X.sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        shares = X / np.where(totals > 0, totals, 1.0)
        return np.where(totals > 0, 1.0 / np.sum(shares * shares, axis=0), np.nan)


def n2_corrected_tolerances(tolerances, n2):
    """Tolerances corrected for the few occurrences they rest on: ``t_k / sqrt(1 - 1/N2_k)``.

    A tolerance estimated from N2 effective occurrences is biased low like a variance
    with ``N2`` rather than ``N2 - 1`` in its denominator; the correction is undefined
    (NaN) for N2 <= 1.

    References
    ----------
    ter Braak, C. J. F. & van Dam, H. (1989). Inferring pH from diatoms: a comparison of old
    and new calibration methods. Hydrobiologia 178, 209-223. doi:10.1007/BF00006028;
    Birks et al. (1990), Phil. Trans. R. Soc. B 327, 263-278.
    """
    t = np.asarray(tolerances, dtype=float)
    n2 = np.asarray(n2, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(n2 > 1, t / np.sqrt(1.0 - 1.0 / np.where(n2 > 1, n2, 2.0)), np.nan)


def _linear_fit(x, y):
    """Ordinary least squares ``y = intercept + slope x``."""
    slope, intercept = np.polyfit(x, y, 1)
    return float(intercept), float(slope)


class AbundanceRegressor(RegressorMixin, BaseEstimator):
    """Shared contract of the assemblage estimators (WA, WA-PLS, MAT): non-negative
    abundances in, one target value per sample out (scikit-learn regressor)."""

    def __sklearn_tags__(self):
        tags = super().__sklearn_tags__()
        tags.input_tags.positive_only = True
        return tags

    def _training_data(self, X, y):
        """``(X, y)`` of ``fit`` as float arrays; abundances must be non-negative."""
        X, y = validate_data(self, X, y, y_numeric=True, dtype=np.float64)
        if np.any(X < 0):
            raise ValueError("Negative values in data: abundances must be non-negative")
        return X, y

    def _fitted_input(self, X):
        """``X`` of ``predict`` as a float array, checked against the fitted estimator."""
        check_is_fitted(self)
        return validate_data(self, X, reset=False, dtype=np.float64)


class WA(AbundanceRegressor):
    """Weighted-averaging regression and calibration with deshrinking.

    The initial estimate for a sample is the abundance-weighted mean of the taxon optima,
    ``x0_j = sum_k y_jk u_k / sum_k y_jk`` (with tolerance weighting
    ``sum_k y_jk u_k / t_k^2 / sum_k y_jk / t_k^2``). Averaging twice shrinks the range, so the
    estimates are deshrunk by a linear regression fitted on the training set:

    - ``deshrinking="inverse"`` (default): regress the observed values on ``x0``;
    - ``deshrinking="classical"``: regress ``x0`` on the observed values and invert.

    Parameters
    ----------
    deshrinking : {"inverse", "classical"}
    tolerance_weighting : bool
        Weight each taxon by ``1 / t_k^2`` (WA-Tol) with N2-corrected tolerances
        (:func:`n2_corrected_tolerances`).
    min_tolerance : float or None
        Corrected tolerances below this [target units] (and undefined ones) are raised to it
        when ``tolerance_weighting``; default the upper quartile of the corrected tolerances
        (:data:`TOLERANCE_FLOOR_PERCENTILE`), so that no rare taxon with a narrow tolerance
        by chance outweighs the well-sampled ones.

    Attributes
    ----------
    optima_ : ndarray of shape (n_features,)
        Taxon optima ``u_k`` [target units] (NaN for taxa absent from the training set).
    tolerances_ : ndarray of shape (n_features,)
        Taxon tolerances ``t_k`` [target units], uncorrected.
    n2_ : ndarray of shape (n_features,)
        Hill's N2 of every taxon.
    taxon_weights_ : ndarray of shape (n_features,)
        Weights used for the initial estimates (0 for absent taxa).
    intercept_, slope_ : float
        Deshrinking line, final estimate ``= intercept_ + slope_ * x0``.
    n_features_in_ : int

    References
    ----------
    Birks, H. J. B., Line, J. M., Juggins, S., Stevenson, A. C. & ter Braak, C. J. F. (1990).
    Diatoms and pH reconstruction. Phil. Trans. R. Soc. B 327, 263-278.
    doi:10.1098/rstb.1990.0062
    """

    def __init__(self, deshrinking="inverse", tolerance_weighting=False, min_tolerance=None):
        self.deshrinking = deshrinking
        self.tolerance_weighting = tolerance_weighting
        self.min_tolerance = min_tolerance

    def fit(self, X, y):
        """Estimate optima, tolerances and the deshrinking line from a training set."""
        if self.deshrinking not in ("inverse", "classical"):
            raise ValueError("deshrinking must be 'inverse' or 'classical', "
                             f"got {self.deshrinking!r}")
        X, y = self._training_data(X, y)
        if X.shape[0] < 3:
            raise ValueError(f"WA needs at least 3 training samples, got n_samples={X.shape[0]}")
        self.optima_ = wa_optima(X, y)
        self.tolerances_ = wa_tolerances(X, y, self.optima_)
        present = np.isfinite(self.optima_)
        weights = present.astype(float)
        self.n2_ = hill_n2(X)
        if self.tolerance_weighting:
            corrected = n2_corrected_tolerances(self.tolerances_, self.n2_)
            defined = present & np.isfinite(corrected) & (corrected > 0)
            floor = self.min_tolerance
            if floor is None:
                floor = float(np.percentile(corrected[defined], TOLERANCE_FLOOR_PERCENTILE)) \
                    if defined.any() else (np.ptp(y) or 1.0)
            tol = np.where(defined, np.maximum(corrected, floor), floor)
            weights = np.where(present, 1.0 / tol ** 2, 0.0)
        self.taxon_weights_ = weights
        initial = self._initial_estimates(X)
        ok = np.isfinite(initial)
        if ok.sum() < 3 or np.ptp(initial[ok]) == 0:
            raise ValueError("WA initial estimates are constant; the taxa carry no signal")
        if self.deshrinking == "inverse":
            self.intercept_, self.slope_ = _linear_fit(initial[ok], y[ok])
        else:
            a0, a1 = _linear_fit(y[ok], initial[ok])
            self.intercept_, self.slope_ = -a0 / a1, 1.0 / a1
        return self

    def _initial_estimates(self, X):
        weighted = X * self.taxon_weights_[None, :]
        totals = weighted.sum(axis=1)
        optima = np.nan_to_num(self.optima_)
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.where(totals > 0, (weighted @ optima) / np.where(totals > 0, totals, 1.0),
                            np.nan)

    def initial_estimates(self, X):
        """Weighted averages of the optima before deshrinking, shape (n_samples,)."""
        X = self._fitted_input(X)
        return self._initial_estimates(X)

    def predict(self, X):
        """Deshrunk WA estimates, shape (n_samples,); NaN where a sample holds none of the
        training taxa."""
        check_is_fitted(self)
        return self.intercept_ + self.slope_ * self.initial_estimates(X)
