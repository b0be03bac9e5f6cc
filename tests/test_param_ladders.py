"""ParamLadder on real scikit-learn estimators, and bias² / variance moving the right way.

Outside references:

- k-nearest neighbours at a fixed design: variance sigma²/k and squared bias
  [f(x0) - mean of f over the k neighbours]² (Hastie, Tibshirani & Friedman, *The Elements of
  Statistical Learning*, 2nd ed., eq. 7.10; equation number from memory).
- Ridge with an unpenalised intercept is the linear smoother
  S = 11'/n + Xc (Xc'Xc + alpha I)^-1 Xc' on centred inputs (ESL §3.4.1, from memory; this is
  what scikit-learn's Ridge documents: the intercept is not penalised, X is centred).
- Any linear smoother y -> S y with Gaussian noise: predictions have covariance
  Sigma = sigma² S S', so the mean pointwise variance is tr(Sigma)/m, and the Monte-Carlo
  estimates have exactly known spread: Var(sum of sample variances) = 2 tr(Sigma²)/(B-1)
  (Wishart), and for z ~ N(mu, V), Var(z'z) = 2 tr(V²) + 4 mu'V mu (moments of Gaussian quadratic
  forms; common practice). Every Monte-Carlo comparison below uses 4 of those standard deviations.
- scikit-learn's ``cross_val_score`` on the same folds, and its SplineTransformer / Ridge fitted
  on unit responses to obtain the smoother matrix of a spline pipeline.
"""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.datasets import load_diabetes
from sklearn.linear_model import Ridge
from sklearn.model_selection import cross_val_score
from sklearn.neighbors import KNeighborsRegressor, NearestNeighbors
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import SplineTransformer
from sklearn.tree import DecisionTreeRegressor

import complexity as cx

pytestmark = pytest.mark.filterwarnings("ignore::complexity.CapacityWarning")

SIGMA = 0.3
B = 100  # simulated training sets per ladder
MC_SDS = 4.0  # Monte-Carlo tolerance in standard deviations (common practice)


def _truth(X):
    x = X[:, 0]
    return np.sin(2 * np.pi * x) + 0.5 * x


@pytest.fixture(scope="module")
def design():
    # a fixed design with distinct x (no distance ties between neighbours)
    rng = np.random.default_rng(20261202)
    return np.sort(rng.uniform(0.0, 1.0, 40)).reshape(-1, 1)


def _variance_moments(S, sigma):
    """Exact mean of the pointwise variance estimate and its Monte-Carlo SD (B resamples)."""
    cov = sigma**2 * S @ S.T
    m = S.shape[0]
    mean = np.trace(cov) / m
    sd = np.sqrt(2.0 * np.trace(cov @ cov) / (B - 1)) / m
    return mean, sd


def _bias_moments(S, f, sigma):
    """Exact mean squared bias of a linear smoother and the SD of the sweep's unbiased estimate."""
    cov = sigma**2 * S @ S.T
    m = S.shape[0]
    b = S @ f - f
    tr2 = np.trace(cov @ cov)
    var = 2 * tr2 / B**2 + 4 * b @ cov @ b / B + 2 * tr2 / ((B - 1) * B**2)
    return float(b @ b / m), float(np.sqrt(var) / m)


def _smoother_by_unit_responses(estimator, X):
    """Smoother matrix of a linear-in-y estimator: column j = fit on the j-th unit response."""
    n = X.shape[0]
    S = np.empty((n, n))
    for j in range(n):
        e = np.zeros(n)
        e[j] = 1.0
        S[:, j] = estimator.fit(X, e).predict(X)
    return S


def _check_linear_smoother_curves(result, smoothers, f):
    for cap, S in smoothers.items():
        v_mean, v_sd = _variance_moments(S, SIGMA)
        assert abs(result.curves.loc[cap, "variance"] - v_mean) <= MC_SDS * v_sd, cap
        b_mean, b_sd = _bias_moments(S, f, SIGMA)
        assert abs(result.curves.loc[cap, "bias_sq"] - b_mean) <= MC_SDS * b_sd, cap


# ------------------------------------------------------------------ k nearest neighbours


def test_knn_variance_and_bias_follow_the_textbook_formula(design):
    values = [1, 3, 7, 15]
    ladder = cx.ParamLadder(KNeighborsRegressor(), "n_neighbors", values, simpler="high")
    assert ladder.capacities == (15, 7, 3, 1)  # simpler = larger k, listed simplest first
    plan = cx.Simulation(_truth, SIGMA, design, n_resamples=B)
    result = cx.sweep(ladder, plan=plan, random_state=0)
    f = _truth(design)
    smoothers = {}
    for k in values:
        # reference neighbours from sklearn's NearestNeighbors (each point is its own nearest)
        idx = NearestNeighbors(n_neighbors=k).fit(design).kneighbors(design)[1]
        S = np.zeros((len(f), len(f)))
        np.put_along_axis(S, idx, 1.0 / k, axis=1)
        smoothers[k] = S
        # ESL eq. 7.10: the variance term is sigma^2 / k at every point
        assert _variance_moments(S, SIGMA)[0] == pytest.approx(SIGMA**2 / k, rel=1e-12)
    _check_linear_smoother_curves(result, smoothers, f)
    # direction: variance grows with capacity (k = 15 -> k = 1), squared bias shrinks
    v, b2 = result.curves["variance"], result.curves["bias_sq"]
    assert v.loc[1] - v.loc[15] > MC_SDS * (_variance_moments(smoothers[1], SIGMA)[1] * 2)
    assert b2.loc[15] > b2.loc[1]


# ------------------------------------------------------------------ ridge on a log grid


def test_ridge_alpha_log_grid_matches_the_ridge_smoother():
    rng = np.random.default_rng(5)
    X = rng.standard_normal((40, 6))

    def truth(Z):
        return Z @ np.array([1.0, -0.5, 0.25, 0.0, 0.0, 0.0]) + 0.3 * Z[:, 0] ** 2

    alphas = np.logspace(-2, 3, 6)
    ladder = cx.ParamLadder(Ridge(), "alpha", list(alphas), simpler="high")
    assert ladder.capacities == tuple(sorted(alphas, reverse=True))
    result = cx.sweep(ladder, plan=cx.Simulation(truth, SIGMA, X, n_resamples=B), random_state=1)
    Xc = X - X.mean(axis=0)
    n = X.shape[0]
    smoothers = {
        a: np.full((n, n), 1.0 / n) + Xc @ np.linalg.solve(Xc.T @ Xc + a * np.eye(6), Xc.T)
        for a in alphas
    }
    # the formula is scikit-learn's Ridge (checked once, to the rounding of the solver)
    S_ref = _smoother_by_unit_responses(Ridge(alpha=alphas[2]), X)
    np.testing.assert_allclose(smoothers[alphas[2]], S_ref, atol=1e-10)
    _check_linear_smoother_curves(result, smoothers, truth(X))
    v = result.curves["variance"].to_numpy()
    assert v[-1] - v[0] > MC_SDS * 2 * _variance_moments(smoothers[alphas[0]], SIGMA)[1]
    b2 = result.curves["bias_sq"].to_numpy()
    assert b2[0] > b2[-1]


def test_ridge_ladder_cross_validation_equals_cross_val_score():
    # Reference: sklearn cross_val_score of Ridge(alpha) on the sweep's folds (diabetes data).
    X, y = load_diabetes(return_X_y=True)
    plan = cx.CrossValidation(5)
    folds = list(plan.split(X, random_state=9))
    alphas = [1e-3, 1e-1, 1.0, 10.0]
    result = cx.sweep(
        cx.ParamLadder(Ridge(), "alpha", alphas, simpler="high"), X, y, plan=plan, random_state=9
    )
    sizes = np.array([len(t) for _, t in folds], dtype=float)
    for a in alphas:
        scores = -cross_val_score(Ridge(alpha=a), X, y, cv=folds, scoring="neg_mean_squared_error")
        assert result.curves.loc[a, "test_mse"] == pytest.approx(
            scores @ sizes / sizes.sum(), rel=1e-10
        )


# ------------------------------------------------------------------ splines in a pipeline


def test_spline_pipeline_knots_as_the_capacity(design):
    knots = [3, 5, 9, 15]
    pipe = make_pipeline(SplineTransformer(degree=3), Ridge(alpha=1e-4))
    ladder = cx.ParamLadder(pipe, "splinetransformer__n_knots", knots)
    assert ladder.capacity_name == "splinetransformer__n_knots"
    result = cx.sweep(
        ladder, plan=cx.Simulation(_truth, SIGMA, design, n_resamples=B), random_state=2
    )
    assert list(result.curves.index) == knots
    # SplineTransformer's knots come from the design (fixed), so the pipeline is linear in y
    smoothers = {
        k: _smoother_by_unit_responses(
            make_pipeline(SplineTransformer(n_knots=k, degree=3), Ridge(alpha=1e-4)), design
        )
        for k in knots
    }
    _check_linear_smoother_curves(result, smoothers, _truth(design))
    v, b2 = result.curves["variance"], result.curves["bias_sq"]
    assert v.loc[15] - v.loc[3] > MC_SDS * 2 * _variance_moments(smoothers[15], SIGMA)[1]
    assert b2.loc[3] > b2.loc[15]


# ------------------------------------------------------------------ trees


def test_tree_depth_variance_grows_and_bias_shrinks(design):
    # A depth-1 tree averages about half the data per leaf (variance near sigma²/20); an
    # unlimited tree on 40 distinct x has one point per leaf (variance near sigma²). The
    # variance estimates have relative Monte-Carlo SD at most sqrt(2/(B-1)) = 0.13 (every point
    # perfectly correlated, the worst case), so a ratio above 3 is far outside the noise.
    ladder = cx.ParamLadder(DecisionTreeRegressor(), "max_depth", [None, 1, 2, 4])
    assert ladder.capacities == (1, 2, 4, None)  # None means no limit: the complex end
    result = cx.sweep(
        ladder, plan=cx.Simulation(_truth, SIGMA, design, n_resamples=B), random_state=3
    )
    v, b2 = result.curves["variance"], result.curves["bias_sq"]
    assert v.loc[None] > 3 * v.loc[1]
    assert v.loc[None] == pytest.approx(SIGMA**2, rel=MC_SDS * np.sqrt(2 / (B - 1)))
    assert b2.loc[1] > 10 * max(b2.loc[None], 1e-3)


def test_tree_ladder_on_data_recommends_a_listed_depth():
    X, y = cx.datasets.pressure_sensor()
    ladder = cx.ParamLadder(DecisionTreeRegressor(), "max_depth", [1, 2, 3, 5])
    result = cx.sweep(ladder, X, y, plan=cx.Bootstrap(20), random_state=0)
    assert result.recommended in (1, 2, 3, 5)
    assert result.capacity_name == "max_depth"
    # seeded per resample: the same random_state gives the same curves
    again = cx.sweep(ladder, X, y, plan=cx.Bootstrap(20), random_state=0)
    np.testing.assert_array_equal(result.curves["test_mse"], again.curves["test_mse"])


def test_param_ladder_refuses_an_unknown_parameter():
    with pytest.raises(ValueError, match="param='n_knots' is not a parameter of Pipeline"):
        cx.ParamLadder(make_pipeline(SplineTransformer(), Ridge()), "n_knots", [3, 5])
