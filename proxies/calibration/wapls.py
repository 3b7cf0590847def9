"""Weighted-averaging partial least squares (WA-PLS) as a scikit-learn estimator."""

from __future__ import annotations

import numpy as np

from .wa import AbundanceRegressor, row_profiles

__all__ = ["WAPLS", "wapls_coefficients"]


def wapls_coefficients(X, y, n_components):
    """Fit WA-PLS and return the taxon coefficients of every number of components.

    The algorithm of ter Braak & Juggins (1993), with sites weighted by their totals
    ``R_i = sum_k x_ik``:

    1. ``r = y - ybar`` (``ybar`` the R-weighted mean);
    2. for each component a: taxon scores ``u_k = sum_i x_ik r_i / C_k`` (weighted averages of
       the current residuals ``r``), site scores ``s_i = sum_k x_ik u_k / R_i``, made
       R-orthogonal to the previous components' site scores; the y residuals are regressed on
       ``s`` (weighted by R) and ``r`` becomes the new residuals.

    Everything is linear in the row profiles ``p_i = x_i / R_i``, so the prediction with ``a``
    components is ``ybar + p @ coef[a - 1]``.

    Parameters
    ----------
    X : ndarray of shape (n_samples, n_taxa)
        Non-negative abundances.
    y : ndarray of shape (n_samples,)
    n_components : int

    Returns
    -------
    intercept : float
        ``ybar`` [target units].
    coef : ndarray of shape (n_components, n_taxa)
        Cumulative taxon coefficients.

    References
    ----------
    ter Braak, C. J. F. & Juggins, S. (1993). Weighted averaging partial least squares
    regression (WA-PLS): an improved method for reconstructing environmental variables from
    species assemblages. Hydrobiologia 269/270, 485-502. doi:10.1007/BF00028046
    """
    row_totals = X.sum(axis=1)
    col_totals = X.sum(axis=0)
    present = col_totals > 0
    safe_cols = np.where(present, col_totals, 1.0)
    # samples with a zero total get zero weight (their profile is set to 0)
    profiles = np.nan_to_num(row_profiles(X))
    ybar = float(row_totals @ y / row_totals.sum())
    centred = y - ybar
    residual = centred.copy()
    n_taxa = X.shape[1]
    scores, weights_list = [], []
    coef = np.zeros((n_components, n_taxa))
    cumulative = np.zeros(n_taxa)
    scale = float(row_totals @ centred ** 2) or 1.0
    for a in range(n_components):
        u = np.where(present, (X.T @ residual) / safe_cols, 0.0)
        s = profiles @ u
        w = u
        for s_prev, w_prev in zip(scores, weights_list):
            c = (row_totals * s) @ s_prev / ((row_totals * s_prev) @ s_prev)
            s = s - c * s_prev
            w = w - c * w_prev
        norm = (row_totals * s) @ s
        if norm <= 1e-12 * scale:
            # no new direction left (rank exhausted): the component adds nothing
            coef[a:] = cumulative
            break
        beta = (row_totals * residual) @ s / norm
        residual = residual - beta * s
        cumulative = cumulative + beta * w
        coef[a] = cumulative
        scores.append(s)
        weights_list.append(w)
    return ybar, coef


class WAPLS(AbundanceRegressor):
    """WA-PLS regression (ter Braak & Juggins 1993).

    With one component WA-PLS is WA with inverse deshrinking when all samples have the same
    total (percentages); further components use the residual structure in the assemblages.

    Parameters
    ----------
    n_components : int
        Number of components used by :meth:`predict`; :meth:`predict_components` gives all
        of 1..n_components.

    Attributes
    ----------
    intercept_ : float
        R-weighted mean of the training target [target units].
    coef_ : ndarray of shape (n_features,)
        Taxon coefficients of the chosen number of components; prediction is
        ``intercept_ + (x / sum(x)) @ coef_``.
    component_coef_ : ndarray of shape (n_components, n_features)
        Coefficients for 1..n_components components.
    n_features_in_ : int

    References
    ----------
    ter Braak, C. J. F. & Juggins, S. (1993). Hydrobiologia 269/270, 485-502.
    doi:10.1007/BF00028046
    """

    def __init__(self, n_components=3):
        self.n_components = n_components

    def fit(self, X, y):
        """Fit the taxon coefficients of 1..n_components components."""
        if not isinstance(self.n_components, (int, np.integer)) or self.n_components < 1:
            raise ValueError(f"n_components must be a positive integer, got {self.n_components!r}")
        X, y = self._training_data(X, y)
        if np.sum(X.sum(axis=1) > 0) < 3:
            raise ValueError("WA-PLS needs at least 3 training samples with a positive total, "
                             f"got n_samples={int(np.sum(X.sum(axis=1) > 0))}")
        self.intercept_, self.component_coef_ = wapls_coefficients(X, y, int(self.n_components))
        self.coef_ = self.component_coef_[-1]
        return self

    def predict_components(self, X):
        """Predictions with 1..n_components components, shape (n_samples, n_components)."""
        X = self._fitted_input(X)
        return self.intercept_ + row_profiles(X) @ self.component_coef_.T

    def predict(self, X):
        """Predictions with ``n_components`` components, shape (n_samples,)."""
        return self.predict_components(X)[:, -1]
