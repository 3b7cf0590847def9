"""Modern analogue technique (MAT) with the squared-chord distance."""

from __future__ import annotations

import numpy as np
from sklearn.utils.validation import check_is_fitted

from .wa import AbundanceRegressor, row_profiles

__all__ = ["MAT", "squared_chord_distances", "nearest_analogues", "distance_roots"]

_BLOCK = 1024  # rows per block: bounds memory at _BLOCK x n_train float64


def squared_chord_distances(roots_a, roots_b):
    """Squared-chord distances between rows of two tables of square-root proportions.

    ``d_ij = sum_k (sqrt(p_ik) - sqrt(q_jk))^2 = |a_i|^2 + |b_j|^2 - 2 a_i . b_j`` computed
    with one matrix product (clipped at 0 against rounding). Inputs are already square roots.

    References
    ----------
    Overpeck, J. T., Webb, T. & Prentice, I. C. (1985). Quantitative interpretation of fossil
    pollen spectra: dissimilarity coefficients and the method of modern analogs. Quaternary
    Research 23, 87-108. doi:10.1016/0033-5894(85)90074-2
    """
    a2 = np.einsum("ij,ij->i", roots_a, roots_a)
    b2 = np.einsum("ij,ij->i", roots_b, roots_b)
    d = a2[:, None] + b2[None, :] - 2.0 * (roots_a @ roots_b.T)
    return np.maximum(d, 0.0)


def nearest_analogues(roots_query, roots_train, k, exclude=None):
    """The k nearest training rows of every query row, blocked over the query rows.

    Parameters
    ----------
    roots_query : ndarray of shape (n_query, n_taxa)
    roots_train : ndarray of shape (n_train, n_taxa)
    k : int
    exclude : ndarray of shape (n_query, n_train) of bool, or "self", or None
        Training rows not allowed as analogues (``"self"``: query row i is training row i,
        for leave-one-out).

    Returns
    -------
    distances, indices : ndarray of shape (n_query, k)
        Sorted by increasing distance.
    """
    n_query = roots_query.shape[0]
    k = int(min(k, roots_train.shape[0] - (1 if exclude is not None else 0)))
    distances = np.empty((n_query, k))
    indices = np.empty((n_query, k), dtype=np.int64)
    for start in range(0, n_query, _BLOCK):
        stop = min(start + _BLOCK, n_query)
        # NaN rows (samples with a zero total) are never analogues
        d = np.nan_to_num(squared_chord_distances(roots_query[start:stop], roots_train),
                          nan=np.inf)
        if isinstance(exclude, str) and exclude == "self":
            d[np.arange(stop - start), np.arange(start, stop)] = np.inf
        elif exclude is not None:
            d[exclude[start:stop]] = np.inf
        part = np.argpartition(d, k - 1, axis=1)[:, :k] if k < d.shape[1] else \
            np.tile(np.arange(d.shape[1]), (stop - start, 1))
        dk = np.take_along_axis(d, part, axis=1)
        order = np.argsort(dk, axis=1, kind="stable")
        indices[start:stop] = np.take_along_axis(part, order, axis=1)
        distances[start:stop] = np.take_along_axis(dk, order, axis=1)
    return distances, indices


def distance_roots(X, transform="none"):
    """Rows whose squared Euclidean distances are the squared-chord distances.

    ``transform`` says what was already done to the abundances (applied once, never
    again): ``"none"`` -> square roots of the row proportions; ``"sqrt"`` -> the rows are
    already square roots of abundances, so they are scaled to unit length
    (``sqrt(p / sum p) = r / |r|``) and give exactly the squared-chord distance of the
    untransformed abundances; ``"log"`` -> square roots of the proportions of the
    transformed values (squared-chord distance of ``ln(1 + x)``).
    """
    X = np.asarray(X, dtype=float)
    if transform == "sqrt":
        norms = np.sqrt(np.einsum("ij,ij->i", X, X))[:, None]
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.where(norms > 0, X / np.where(norms > 0, norms, 1.0), np.nan)
    if transform in ("none", "log"):
        return np.sqrt(row_profiles(X))
    raise ValueError(f"unknown transform {transform!r}; use 'none', 'sqrt' or 'log'")


class MAT(AbundanceRegressor):
    """Modern analogue technique: the mean target of the k nearest training samples.

    Distances are squared-chord distances between sample proportions (rows divided by
    their totals), ranging from 0 (identical) to 2 (no taxon in common); with
    ``input_transform`` the inputs' transform is taken into account (:func:`distance_roots`).

    Parameters
    ----------
    n_analogues : int
        Number of analogues k.
    weighted : bool
        Weight analogues by inverse distance instead of a plain mean.
    input_transform : {"none", "sqrt", "log"}
        The transform already applied to ``X`` (see :func:`distance_roots`).

    Attributes
    ----------
    training_roots_ : ndarray of shape (n_train, n_features)
        Square roots of the training proportions.
    training_target_ : ndarray of shape (n_train,)
    n_features_in_ : int

    References
    ----------
    Overpeck, J. T., Webb, T. & Prentice, I. C. (1985). Quaternary Research 23, 87-108.
    doi:10.1016/0033-5894(85)90074-2
    """

    def __init__(self, n_analogues=5, weighted=False, input_transform="none"):
        self.n_analogues = n_analogues
        self.weighted = weighted
        self.input_transform = input_transform

    def fit(self, X, y):
        """Store the training proportions (as square roots) and targets."""
        if not isinstance(self.n_analogues, (int, np.integer)) or self.n_analogues < 1:
            raise ValueError(f"n_analogues must be a positive integer, got {self.n_analogues!r}")
        X, y = self._training_data(X, y)
        if not np.any(X.sum(axis=1) > 0):
            raise ValueError("no training sample has a positive total abundance")
        self.training_roots_ = distance_roots(X, self.input_transform)
        self.training_target_ = np.asarray(y, dtype=float)
        return self

    def _roots(self, X):
        X = self._fitted_input(X)
        return distance_roots(X, self.input_transform)

    def kneighbors(self, X, n_analogues=None):
        """Distances and indices of the nearest training samples, each (n_samples, k)."""
        return nearest_analogues(self._roots(X), self.training_roots_,
                                 n_analogues or self.n_analogues)

    def _combine(self, distances, indices):
        targets = self.training_target_[indices]
        if not self.weighted:
            return targets.mean(axis=1)
        w = 1.0 / np.maximum(distances, 1e-12)
        return (w * targets).sum(axis=1) / w.sum(axis=1)

    def predict(self, X):
        """Mean (or inverse-distance-weighted mean) target of the k analogues; NaN for samples
        with a zero total."""
        roots = self._roots(X)
        out = self._combine(*nearest_analogues(np.nan_to_num(roots), self.training_roots_,
                                               self.n_analogues))
        out[np.isnan(roots).any(axis=1)] = np.nan
        return out

    def predict_excluding(self, exclude="self"):
        """Predict the training samples themselves, each without the excluded analogues.

        ``exclude="self"`` gives leave-one-out predictions; a boolean (n_train, n_train)
        mask gives e.g. h-block predictions (Telford & Birks 2009).
        """
        check_is_fitted(self)
        d, idx = nearest_analogues(self.training_roots_, self.training_roots_, self.n_analogues,
                                   exclude=exclude)
        return self._combine(d, idx)
