"""WA, WA-PLS and MAT: published identities, independent implementations, sklearn contract."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.cross_decomposition import PLSRegression
from sklearn.utils.estimator_checks import parametrize_with_checks

from calibration_simulation import gaussian_response_training
from proxies.calibration import MAT, WA, WAPLS
from proxies.calibration.assemblage import (counts_to_percentages, rare_taxa_mask,
                                            transform_abundances)
from proxies.calibration.crossval import loo_predictions


def independent_wa(X, y, X_new, deshrinking="inverse"):
    """The published WA formula written out with explicit loops (Birks et al. 1990):
    u_k = sum_i y_ik x_i / sum_i y_ik; x0_j = sum_k y_jk u_k / sum_k y_jk; then deshrinking
    by ordinary least squares (inverse: x on x0; classical: x0 on x, inverted)."""
    n, m = X.shape
    optima = []
    for k in range(m):
        num = sum(X[i, k] * y[i] for i in range(n))
        den = sum(X[i, k] for i in range(n))
        optima.append(num / den if den > 0 else 0.0)
    weights = [1.0 if X[:, k].sum() > 0 else 0.0 for k in range(m)]

    def initial(rows):
        out = []
        for row in rows:
            num = sum(row[k] * optima[k] * weights[k] for k in range(m))
            den = sum(row[k] * weights[k] for k in range(m))
            out.append(num / den)
        return np.array(out)

    x0 = initial(X)
    def ols(a, b):  # b = c0 + c1 a, textbook formulas
        c1 = np.sum((a - a.mean()) * (b - b.mean())) / np.sum((a - a.mean()) ** 2)
        return b.mean() - c1 * a.mean(), c1
    if deshrinking == "inverse":
        c0, c1 = ols(x0, y)
        return c0 + c1 * initial(X_new)
    c0, c1 = ols(y, x0)
    return (initial(X_new) - c0) / c1


@pytest.fixture(scope="module")
def unseen():
    """An unseen simulated training set and fossil set (seed not used anywhere else)."""
    rng = np.random.default_rng(987_654_321)
    x, y, _ = gaussian_response_training(160, 45, rng, noise_sd=1.0)
    keep = x.sum(axis=0) > 0
    x_new, _, _ = gaussian_response_training(40, 45, np.random.default_rng(11), noise_sd=1.0)
    return x[:, keep], y, x_new[:, keep]


@pytest.mark.parametrize("deshrinking", ["inverse", "classical"])
def test_wa_matches_independent_formula(unseen, deshrinking):
    """MUST SHOW: WA() equals the published formula (independent loop implementation) to
    1e-6 on an unseen simulated set (Birks et al. 1990, doi:10.1098/rstb.1990.0062)."""
    x, y, x_new = unseen
    ours = WA(deshrinking=deshrinking).fit(x, y).predict(x_new)
    np.testing.assert_allclose(ours, independent_wa(x, y, x_new, deshrinking), atol=1e-6)


def test_wapls_one_component_is_wa_inverse(unseen):
    """MUST SHOW: WA-PLS with one component equals WA with inverse deshrinking for
    percentage data (ter Braak & Juggins 1993, doi:10.1007/BF00028046), to 1e-6 against the
    independent formula."""
    x, y, x_new = unseen
    ours = WAPLS(n_components=1).fit(x, y).predict(x_new)
    np.testing.assert_allclose(ours, independent_wa(x, y, x_new, "inverse"), atol=1e-6)


def test_wapls_two_components_not_worse_than_wa(unseen):
    """MUST SHOW: leave-one-out RMSEP of WA-PLS with 2 components is within 10 % of WA's."""
    x, y, _ = unseen
    rmsep_wa = np.sqrt(np.mean((loo_predictions(WA(), x, y)[:, 0] - y) ** 2))
    rmsep_2 = np.sqrt(np.mean((loo_predictions(WAPLS(2), x, y)[:, 1] - y) ** 2))
    assert rmsep_2 <= 1.10 * rmsep_wa


def test_wapls_agrees_with_sklearn_pls(unseen):
    """Where the algorithms coincide -- equal row totals, columns scaled by 1/sqrt(column
    total), no X scaling -- WA-PLS is PLS1 (NIPALS) and must equal scikit-learn's
    PLSRegression for every number of components (our derivation; checked to 1e-8)."""
    x, y, x_new = unseen
    ours = WAPLS(n_components=4).fit(x, y)
    scale = 1.0 / np.sqrt(x.sum(axis=0))
    for a in range(1, 5):
        pls = PLSRegression(n_components=a, scale=False).fit(x * scale, y)
        np.testing.assert_allclose(ours.predict_components(x_new)[:, a - 1],
                                   pls.predict(x_new * scale).ravel(), atol=1e-8)


def test_wa_tolerance_weighting_and_classical_expand_range(unseen):
    """Classical deshrinking expands the predicted range relative to inverse deshrinking
    (common practice: inverse shrinks toward the mean); tolerance weighting changes the fit
    and its tolerances equal the abundance-weighted SD of y about the optimum."""
    x, y, x_new = unseen
    inv = WA().fit(x, y)
    cla = WA(deshrinking="classical").fit(x, y)
    assert np.ptp(cla.predict(x)) > np.ptp(inv.predict(x))
    tol = WA(tolerance_weighting=True).fit(x, y)
    assert not np.allclose(tol.predict(x_new), inv.predict(x_new))
    k = int(np.argmax(x.sum(axis=0)))
    w = x[:, k]
    expected = np.sqrt(np.sum(w * (y - inv.optima_[k]) ** 2) / w.sum())
    assert inv.tolerances_[k] == pytest.approx(expected, rel=1e-12)


def test_mat_matches_brute_force(unseen):
    """MAT against a brute-force squared-chord implementation (Overpeck et al. 1985)."""
    x, y, x_new = unseen
    p = x / x.sum(axis=1, keepdims=True)
    q = x_new / x_new.sum(axis=1, keepdims=True)
    expected = []
    for row in q:
        d = [np.sum((np.sqrt(row) - np.sqrt(t)) ** 2) for t in p]
        expected.append(np.mean(y[np.argsort(d)[:4]]))
    model = MAT(n_analogues=4).fit(x, y)
    np.testing.assert_allclose(model.predict(x_new), expected, atol=1e-10)
    d, _ = model.kneighbors(x_new, 1)
    assert np.all((d >= 0) & (d <= 2 + 1e-12))


def test_mat_leave_one_out_excludes_self(unseen):
    """LOO predictions of MAT differ from in-sample ones (where the sample is its own
    nearest analogue at distance 0)."""
    x, y, _ = unseen
    model = MAT(n_analogues=1).fit(x, y)
    np.testing.assert_allclose(model.predict(x), y)
    assert not np.allclose(model.predict_excluding("self"), y)


def test_data_preparation():
    """Counts -> percentages sum to 100; sqrt/log transforms; rare-taxa filter."""
    import pandas as pd
    counts = pd.DataFrame({"a": [10, 0, 5], "b": [30, 1, 0], "c": [0, 0, 2]})
    pct = counts_to_percentages(counts)
    np.testing.assert_allclose(pct.sum(axis=1), 100.0)
    assert pct.loc[0, "b"] == pytest.approx(75.0)
    np.testing.assert_allclose(transform_abundances(pct.to_numpy(), "sqrt"), np.sqrt(pct))
    np.testing.assert_allclose(transform_abundances(pct.to_numpy(), "log"), np.log1p(pct))
    assert list(rare_taxa_mask(pct.to_numpy(), 2)) == [True, True, False]
    assert list(rare_taxa_mask(pct.to_numpy(), 1, 80.0)) == [False, True, False]
    with pytest.raises(ValueError):
        counts_to_percentages(pd.DataFrame({"a": [-1]}))
    with pytest.raises(ValueError, match="deshrinking"):
        WA(deshrinking="sideways").fit(pct.to_numpy(), [1.0, 2.0, 3.0])


@parametrize_with_checks([WA(), WA(deshrinking="classical", tolerance_weighting=True),
                          WAPLS(n_components=2), MAT(n_analogues=3)])
def test_sklearn_estimator_contract(estimator, check):
    """scikit-learn's own estimator checks (sklearn.utils.estimator_checks)."""
    check(estimator)
