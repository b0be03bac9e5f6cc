"""Weighted least squares on the exact engine (``sample_weight`` with a least-squares ladder).

Outside references:

- the generic engine, which fits scikit-learn's ``LinearRegression().fit(X, y, sample_weight=w)``
  on every training set (multiplicity times weight for bootstrap copies) and scores residuals
  unweighted: the exact engine must give the same curves on the same resamples;
- statsmodels' ``WLS(y, X, weights=w).fit()``: params, bse, hat-matrix diagonal of the whitened
  design and log-likelihood (for AIC) of the full-data fit.

Data: scikit-learn's bundled diabetes data set (442 rows, ten standardised predictors). The
weights are derived deterministically from its ``age`` column, ``w_i = exp(age_i / (2 sd(age)))``
(positive, from about 0.4 to 2.5): a stand-in for per-row precision, as a user might give.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import complexity as cx

pytestmark = pytest.mark.filterwarnings("ignore::complexity.CapacityWarning")

sm = pytest.importorskip("statsmodels.api")
datasets = pytest.importorskip("sklearn.datasets")


@pytest.fixture(scope="module")
def diabetes():
    X, y = datasets.load_diabetes(return_X_y=True)
    age = X[:, 0]
    w = np.exp(age / (2.0 * np.std(age)))
    return X, y, w


def _numeric(curves: pd.DataFrame) -> pd.DataFrame:
    return curves.select_dtypes("number").astype(float)


def _assert_curves_close(a: pd.DataFrame, b: pd.DataFrame, rtol: float) -> None:
    a, b = _numeric(a), _numeric(b)
    if list(a.columns) != list(b.columns):  # the generic engine has no closed-form criteria
        a = a[[col for col in a.columns if col in b.columns]]
        b = b[list(a.columns)]
    assert "test_mse" in a.columns
    for col in a.columns:
        x, y = a[col].to_numpy(), b[col].to_numpy()
        np.testing.assert_array_equal(np.isnan(x), np.isnan(y), err_msg=col)
        ok = ~np.isnan(x)
        scale = np.maximum(np.abs(x[ok]), np.max(np.abs(a["test_mse"].to_numpy())) * 1e-6)
        assert np.all(np.abs(x[ok] - y[ok]) <= rtol * scale), (col, x, y)


PLANS = {
    "bootstrap": lambda: cx.Bootstrap(30),
    "kfold": lambda: cx.CrossValidation(5, n_repeats=2),
}


def _ladder_data(kind, X):
    if kind == "polynomial":
        return cx.PolynomialLadder(range(0, 6)), X[:, 2:3]  # bmi
    return cx.FeatureLadder(range(1, 11)), X


@pytest.mark.parametrize("plan", sorted(PLANS))
@pytest.mark.parametrize("kind", ["polynomial", "feature"])
def test_exact_curves_equal_the_generic_engine(diabetes, plan, kind):
    # Reference: the generic engine (scikit-learn LinearRegression with sample_weight) on the
    # same resamples, scored the same way.
    X, y, w = diabetes
    ladder, Xk = _ladder_data(kind, X)
    kwargs = dict(plan=PLANS[plan](), sample_weight=w, random_state=7)
    exact = cx.sweep(ladder, Xk, y, engine="exact", **kwargs)
    generic = cx.sweep(ladder, Xk, y, engine="generic", **kwargs)
    assert exact.metadata["engine"] == "exact"
    assert generic.metadata["engine"] == "generic"
    _assert_curves_close(exact.curves, generic.curves, 1e-9)
    # and the weights matter: the unweighted sweep differs
    plain = cx.sweep(ladder, Xk, y, plan=PLANS[plan](), random_state=7)
    assert not np.allclose(plain.curves["test_mse"], exact.curves["test_mse"], rtol=1e-6)


def test_auto_engine_is_exact_with_weights(diabetes):
    X, y, w = diabetes
    result = cx.sweep(cx.PolynomialLadder(range(0, 3)), X[:, 2], y, sample_weight=w)
    assert result.metadata["engine"] == "exact"


@pytest.mark.parametrize("degree", [0, 1, 2, 3])
def test_polynomial_coefficients_equal_statsmodels_wls(diabetes, degree):
    # Reference: statsmodels WLS(y, [1, x, ..., x^d], weights=w).fit() params and bse.
    X, y, w = diabetes
    x = X[:, 2]
    result = cx.sweep(
        cx.PolynomialLadder(range(0, 4)),
        x,
        y,
        plan=cx.Bootstrap(5),
        sample_weight=w,
        random_state=0,
    )
    table = result.coefficients(degree)
    wls = sm.WLS(y, np.vander(x, degree + 1, increasing=True), weights=w).fit()
    np.testing.assert_allclose(table["estimate"].to_numpy(), wls.params, rtol=1e-10)
    np.testing.assert_allclose(table["std_error"].to_numpy(), wls.bse, rtol=1e-10)


@pytest.mark.parametrize("k", [1, 4, 10])
def test_feature_coefficients_equal_statsmodels_wls(diabetes, k):
    # Reference: statsmodels WLS(y, add_constant(X[:, :k]), weights=w).fit() params and bse.
    X, y, w = diabetes
    result = cx.sweep(
        cx.FeatureLadder(range(1, 11)),
        X,
        y,
        plan=cx.Bootstrap(5),
        sample_weight=w,
        random_state=0,
    )
    table = result.coefficients(k)
    wls = sm.WLS(y, sm.add_constant(X[:, :k]), weights=w).fit()
    np.testing.assert_allclose(table["estimate"].to_numpy(), wls.params, rtol=1e-10)
    np.testing.assert_allclose(table["std_error"].to_numpy(), wls.bse, rtol=1e-10)


def _full_fit(ladder, X, y, w):
    from complexity.engine import Problem
    from complexity.engine.full_fit import fit_full

    Xa = np.asarray(X, dtype=float).reshape(len(y), -1)
    problem = Problem(
        ladder,
        ladder.build(Xa),
        Xa,
        y,
        Xa,
        y,
        cx.Bootstrap(5),
        np.random.SeedSequence(0),
        Xa,
        sample_weight=w,
    )
    return fit_full(problem)


def test_full_fit_leverage_fitted_and_aic_equal_statsmodels(diabetes):
    # Reference: statsmodels WLS: fittedvalues, the hat diagonal of its whitened design
    # (wexog = sqrt(w) Z with normalized_cov_params = (Z'WZ)^-1, so h_i = w_i z_i'(Z'WZ)^-1 z_i)
    # and aic; ours drops the constant -sum(log w_i) of the weighted Gaussian likelihood.
    X, y, w = diabetes
    full = _full_fit(cx.FeatureLadder(range(1, 11)), X, y, w)
    for c, k in enumerate(range(1, 11)):
        wls = sm.WLS(y, sm.add_constant(X[:, :k]), weights=w).fit()
        np.testing.assert_allclose(full.fitted[:, c], wls.fittedvalues, rtol=1e-10)
        wz = wls.model.wexog
        hat = np.einsum("ij,jk,ik->i", wz, wls.normalized_cov_params, wz)
        np.testing.assert_allclose(full.leverage[c], hat, rtol=1e-9, atol=1e-13)
        # the criteria use the weights scaled to mean 1 (the fit is the same)
        unit = w / np.mean(w)
        wls_unit = sm.WLS(y, sm.add_constant(X[:, :k]), weights=unit).fit()
        aic = full.criteria["aic"].iloc[c]
        assert aic == pytest.approx(wls_unit.aic + np.sum(np.log(unit)), rel=1e-11)
        # training error as the generic engine defines it: the plain mean over every row
        assert full.train_mse[c] == pytest.approx(np.mean((wls.fittedvalues - y) ** 2), rel=1e-10)


def test_variance_leverage_is_the_variance_of_the_fit_without_each_row():
    # Reference: the covariance of the linear estimator b = (Z'WZ)^-1 Z'W y under Var(y) = s^2 I,
    # s^2 (Z'WZ)^-1 Z'W^2 Z (Z'WZ)^-1 (Gauss-Markov algebra, common practice), evaluated by brute
    # force for the fit without row i at x_i; the decomposition reads it as s^2 h / (1 - h).
    from complexity.engine import Problem
    from complexity.engine.full_fit import variance_leverage

    rng = np.random.default_rng(4)  # synthetic: 25 rows, weights with two zeros
    x = np.sort(rng.uniform(0, 3, 25))
    y = np.cos(x) + rng.normal(0, 0.1, 25)
    w = rng.uniform(0.1, 4.0, 25)
    w[[3, 17]] = 0.0
    ladder = cx.PolynomialLadder(range(0, 4))
    X = x[:, None]
    problem = Problem(
        ladder,
        ladder.build(X),
        X,
        y,
        X,
        y,
        cx.Bootstrap(5),
        np.random.SeedSequence(0),
        X,
        sample_weight=w,
    )
    h = variance_leverage(problem)
    for degree in range(4):
        Z = np.vander(x, degree + 1, increasing=True)
        for i in range(25):
            m = np.arange(25) != i
            Zm, wm = Z[m], w[m]
            Minv = np.linalg.inv(Zm.T @ (wm[:, None] * Zm))
            N = Zm.T @ ((wm**2)[:, None] * Zm)
            var = Z[i] @ Minv @ N @ Minv @ Z[i]
            assert h[degree, i] / (1 - h[degree, i]) == pytest.approx(var, rel=1e-9)


def test_zero_weights_drop_rows_from_the_fit(diabetes):
    # Reference: statsmodels WLS on the rows of positive weight only (a zero weight removes a row).
    X, y, w = diabetes
    w0 = w.copy()
    w0[::7] = 0.0
    keep = w0 > 0
    full = _full_fit(cx.PolynomialLadder(range(0, 3)), X[:, 2:3], y, w0)
    for degree in range(3):
        wls = sm.WLS(
            y[keep], np.vander(X[keep, 2], degree + 1, increasing=True), weights=w0[keep]
        ).fit()
        table = full.coefficients[degree]
        np.testing.assert_allclose(table["estimate"].to_numpy(), wls.params, rtol=1e-10)
        np.testing.assert_allclose(table["std_error"].to_numpy(), wls.bse, rtol=1e-10)
        # fitted values at the dropped rows are predictions of the same polynomial
        pred = np.vander(X[:, 2], degree + 1, increasing=True) @ wls.params
        np.testing.assert_allclose(full.fitted[:, degree], pred, rtol=1e-10)
        assert np.all(full.leverage[degree][~keep] == 0.0)
    # resampled fits agree with the generic engine too (fold training sets keep enough rows)
    kwargs = dict(plan=cx.CrossValidation(5), sample_weight=w0, random_state=3)
    ladder = cx.PolynomialLadder(range(0, 4))
    exact = cx.sweep(ladder, X[:, 2], y, engine="exact", **kwargs)
    generic = cx.sweep(ladder, X[:, 2], y, engine="generic", **kwargs)
    _assert_curves_close(exact.curves, generic.curves, 1e-9)


def test_too_few_positive_weights_is_a_clear_error(diabetes):
    X, y, _ = diabetes
    w = np.zeros(y.size)
    w[:3] = 1.0
    with pytest.raises(ValueError, match=r"sample_weight leaves 3 row\(s\) of positive weight"):
        cx.sweep(cx.PolynomialLadder(range(0, 5)), X[:, 2], y, sample_weight=w, engine="exact")


@pytest.mark.parametrize("plan", sorted(PLANS))
@pytest.mark.parametrize("kind", ["polynomial", "feature"])
def test_unit_weights_equal_the_unweighted_sweep(diabetes, plan, kind):
    # Weights all 1 are ordinary least squares (statsmodels: WLS with no weights is OLS).
    X, y, _ = diabetes
    ladder, Xk = _ladder_data(kind, X)
    ones = cx.sweep(
        ladder, Xk, y, plan=PLANS[plan](), sample_weight=np.ones(y.size), random_state=5
    )
    plain = cx.sweep(ladder, Xk, y, plan=PLANS[plan](), random_state=5)
    assert ones.metadata["engine"] == plain.metadata["engine"] == "exact"
    _assert_curves_close(ones.curves, plain.curves, 1e-12)
    for cap in ladder.capacities[:3]:
        pd.testing.assert_frame_equal(
            ones.coefficients(cap), plain.coefficients(cap), check_exact=False, rtol=1e-12
        )


def test_results_do_not_depend_on_n_jobs(diabetes):
    X, y, w = diabetes
    kwargs = dict(plan=cx.Bootstrap(60), sample_weight=w, random_state=11)
    ladder = cx.FeatureLadder(range(1, 11))
    one = cx.sweep(ladder, X, y, n_jobs=1, **kwargs)
    two = cx.sweep(ladder, X, y, n_jobs=2, **kwargs)
    pd.testing.assert_frame_equal(one.curves, two.curves, check_exact=True)


_SMALL = np.random.default_rng(20)  # synthetic: a noisy cubic on 60 points
_SX = np.sort(_SMALL.uniform(-1, 1, 60))
_SY = _SX**3 - _SX + _SMALL.normal(0, 0.2, 60)
_SW = _SMALL.uniform(0.2, 3.0, 60)


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(scale=st.floats(min_value=1e-3, max_value=1e3), bootstrap=st.booleans())
def test_scaling_every_weight_leaves_the_curves_unchanged(scale, bootstrap):
    # A weighted least-squares fit depends on the weights only up to a common factor (its normal
    # equations Z'WZ b = Z'Wy are homogeneous in W): common practice.
    plan = cx.Bootstrap(8) if bootstrap else cx.CrossValidation(4)
    ladder = cx.PolynomialLadder(range(0, 6))
    base = cx.sweep(ladder, _SX, _SY, plan=plan, sample_weight=_SW, random_state=1)
    scaled = cx.sweep(ladder, _SX, _SY, plan=plan, sample_weight=scale * _SW, random_state=1)
    _assert_curves_close(base.curves, scaled.curves, 1e-9)
