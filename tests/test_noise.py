"""Tests for complexity.noise: noise-variance estimators and the automatic choice.

Sources (METHODS.md section 12 has full references):
  Draper & Smith (1998) pure error / lack of fit          -> METHODS.md 7.1
  Rice (1984) first differences                            -> METHODS.md 7.3
  Gasser, Sroka & Jennen-Steinmetz (1986) pseudo-residuals -> METHODS.md 7.4
  Hall, Kay & Titterington (1990) optimal differences      -> METHODS.md 7.5
  nearest-neighbour estimator (Devroye et al. 2003)        -> METHODS.md 7.6
Reference libraries: statsmodels OLS, scipy.stats.f, sklearn NearestNeighbors / StandardScaler.
"""

from __future__ import annotations

import math
import zlib

import numpy as np
import pytest
import scipy.sparse as sp
import statsmodels.api as sm
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from scipy import stats
from sklearn.neighbors import NearestNeighbors
from sklearn.preprocessing import StandardScaler

from complexity._noise_differences import _HKT_WEIGHTS
from complexity.noise import (
    difference_variance,
    estimate_noise,
    neighbour_trend_variance,
    neighbour_variance,
    optimal_difference_variance,
    replicate_variance,
    rice_variance,
)

# Every estimator as a function of (X 2-D, y), for the laws that hold for all of them.
ESTIMATORS = {
    "replicates": lambda X, y: replicate_variance(X, y)[0],
    "differences": lambda X, y: difference_variance(X[:, 0], y),
    "rice": lambda X, y: rice_variance(X[:, 0], y),
    "hkt1": lambda X, y: optimal_difference_variance(X[:, 0], y, order=1),
    "hkt2": lambda X, y: optimal_difference_variance(X[:, 0], y, order=2),
    "hkt3": lambda X, y: optimal_difference_variance(X[:, 0], y, order=3),
    "neighbours": neighbour_variance,
    "trend": neighbour_trend_variance,
}

TOY_X = np.array([1.0, 2.0, 3.0, 4.0, 5.0])
TOY_Y = np.array([1.0, 3.0, 2.0, 5.0, 4.0])


# ------------------------------------------------------------------------------------------
# Worked checks (METHODS.md)
# ------------------------------------------------------------------------------------------


def test_pure_error_worked_example_and_lack_of_fit_F():
    # Draper & Smith (1998) pure error / lack of fit; numbers from METHODS.md 7.1 worked check.
    x = np.array([1.0, 1.0, 2.0, 2.0, 3.0, 3.0])
    y = np.array([1.0, 3.0, 2.0, 4.0, 6.0, 8.0])
    sigma2, df = replicate_variance(x, y)
    assert sigma2 == pytest.approx(2.0, rel=1e-14)  # SS_pe = 6, df = 3
    assert df == 3.0
    # The least-squares line from statsmodels OLS (reference library) is y = -1 + 2.5 x, RSS = 9.
    fit = sm.OLS(y, sm.add_constant(x)).fit()
    np.testing.assert_allclose(fit.params, [-1.0, 2.5], rtol=1e-12)
    assert fit.ssr == pytest.approx(9.0, rel=1e-12)
    m, p = 3, 2  # distinct x values, parameters of the line
    F = ((fit.ssr - sigma2 * df) / (m - p)) / sigma2
    assert F == pytest.approx(1.5, rel=1e-12)  # METHODS.md 7.1: F = 1.5 on (1, 3)
    assert stats.f.sf(F, m - p, df) == pytest.approx(0.3081, abs=5e-5)  # p-value 0.3081


def test_rice_toy():
    # Rice (1984); METHODS.md 7.3/7.5 toy check: y = (1,3,2,5,4), equal spacing -> 1.875.
    assert rice_variance(TOY_X, TOY_Y) == pytest.approx(1.875, rel=1e-14)


def test_gsj_toy():
    # Gasser, Sroka & Jennen-Steinmetz (1986); METHODS.md 7.5 toy check: 41/18.
    assert difference_variance(TOY_X, TOY_Y) == pytest.approx(41 / 18, rel=1e-14)


def test_hkt_order2_toy():
    # Hall, Kay & Titterington (1990); METHODS.md 7.5 toy check: m = 2 gives 2.071175.
    assert optimal_difference_variance(TOY_X, TOY_Y, order=2) == pytest.approx(2.071175, abs=5e-7)


def test_nn_toy_and_scaling_keeps_neighbours():
    # METHODS.md 7.6 toy check: neighbours (2, 1, 4, 3), sigma2_NN = 10/8 = 1.25.
    x = np.array([0.0, 0.1, 1.0, 1.1])
    y = np.array([1.0, 2.0, 5.0, 7.0])
    assert neighbour_variance(x, y) == pytest.approx(1.25, rel=1e-14)
    # Scaling to unit SD must not change the neighbours: any rescaling/shift of x gives the same.
    assert neighbour_variance((1000.0 * x + 7.0)[:, None], y) == pytest.approx(1.25, rel=1e-14)


def test_hkt_sequences_satisfy_optimality_conditions():
    # Hall, Kay & Titterington (1990), METHODS.md 7.5: sum d = 0, sum d^2 = 1, rho_l = -1/(2m);
    # tabled values m = 2: (0.8090, -0.5000, -0.3090); m = 3 refined (0.194195, ..., -0.858242).
    tables = {  # (tabled values, half a unit in their last decimal)
        1: ((0.7071, -0.7071), 5e-5),
        2: ((0.8090, -0.5000, -0.3090), 5e-5),
        3: ((0.194195, 0.280892, 0.383155, -0.858242), 5e-7),
    }
    for m, d in _HKT_WEIGHTS.items():
        d = np.asarray(d)
        assert d.sum() == pytest.approx(0.0, abs=1e-15)
        assert (d**2).sum() == pytest.approx(1.0, rel=1e-15)
        for lag in range(1, m + 1):
            assert d[:-lag] @ d[lag:] == pytest.approx(-1 / (2 * m), abs=1e-14)
        table, atol = tables[m]
        np.testing.assert_allclose(d, table, rtol=0, atol=atol)


def test_hkt_order1_is_rice():
    # METHODS.md 7.5: the m = 1 optimal sequence is Rice's estimator ((n-1) = (n-m) here).
    rng = np.random.default_rng(20240611)
    x = rng.uniform(0, 1, 40)
    y = rng.normal(size=40)
    assert optimal_difference_variance(x, y, order=1) == pytest.approx(
        rice_variance(x, y), rel=1e-13
    )


def test_gsj_equal_spacing_closed_form():
    # METHODS.md 7.4: equal spacing -> (1/(6(n-2))) sum (y_{i-1} - 2 y_i + y_{i+1})^2.
    rng = np.random.default_rng(11)
    x = np.arange(30) * 0.25
    y = rng.normal(size=30)
    expected = np.sum(np.diff(y, 2) ** 2) / (6 * (30 - 2))
    assert difference_variance(x, y) == pytest.approx(expected, rel=1e-12)


def test_gsj_matches_published_formula_on_uneven_design():
    # GSJ (1986) as written in METHODS.md 7.4, coded here loop by loop on an unsorted, uneven x.
    rng = np.random.default_rng(5)
    x = rng.uniform(0, 3, 25)
    y = np.cos(x) + rng.normal(0, 0.3, 25)
    order = np.argsort(x)
    xs, ys = x[order], y[order]
    total = 0.0
    for i in range(1, 24):
        a = (xs[i + 1] - xs[i]) / (xs[i + 1] - xs[i - 1])
        b = (xs[i] - xs[i - 1]) / (xs[i + 1] - xs[i - 1])
        e = a * ys[i - 1] + b * ys[i + 1] - ys[i]
        total += e**2 / (a**2 + b**2 + 1)
    assert difference_variance(x, y) == pytest.approx(total / 23, rel=1e-12)


def _sklearn_neighbours(X):
    """Nearest other row after unit-SD scaling, from sklearn (reference library)."""
    Z = StandardScaler().fit_transform(X)
    _, idx = NearestNeighbors(n_neighbors=2).fit(Z).kneighbors(Z)
    return idx[:, 1]


def test_nn_matches_sklearn_neighbours():
    # Estimator of METHODS.md 7.6 with neighbours from sklearn NearestNeighbors + StandardScaler.
    rng = np.random.default_rng(3)
    X = rng.uniform(0, 1, (300, 3)) * np.array([1.0, 100.0, 0.01])  # scaling matters here
    y = rng.normal(size=300)
    nbr = _sklearn_neighbours(X)
    expected = np.sum((y - y[nbr]) ** 2) / (2 * 300)
    assert neighbour_variance(X, y) == pytest.approx(expected, rel=1e-12)


def test_nn_ties_go_to_lowest_index():
    # METHODS.md 7.6: break neighbour ties deterministically (our rule: lowest index).
    # On an equally spaced grid each interior point has two neighbours at the same distance;
    # lowest index means N(0) = 1 and N(i) = i - 1 otherwise.
    x = np.arange(6) * 0.1
    y = np.array([0.0, 1.0, 4.0, 9.0, 16.0, 25.0])
    expected = (1.0 + sum((y[i] - y[i - 1]) ** 2 for i in range(1, 6))) / 12
    assert neighbour_variance(x, y) == pytest.approx(expected, rel=1e-14)
    # Many identical rows (more than the search returns at once): N(0) = 1, N(i) = 0.
    y = np.arange(20.0)
    expected = (1.0 + np.sum(y[1:] ** 2)) / 40
    assert neighbour_variance(np.zeros((20, 2)), y) == pytest.approx(expected, rel=1e-14)


def test_replicates_decimals_groups_near_duplicates():
    # METHODS.md 7.1 pitfall: floating-point near-duplicates need a tolerance.
    X = np.array([[0.1 + 0.2, 1.0], [0.3, 1.0], [0.7, 2.0], [0.7, 2.0]])
    y = np.array([1.0, 3.0, 5.0, 6.0])
    assert replicate_variance(X, y) == (0.5, 1.0)  # only the exact pair: SS = 0.5, df = 1
    sigma2, df = replicate_variance(X, y, decimals=9)
    assert (sigma2, df) == (pytest.approx(2.5 / 2, rel=1e-14), 2.0)  # SS = 2 + 0.5, df = 2
    assert replicate_variance(np.arange(4.0), y) is None  # no row repeats: df = 0


# ------------------------------------------------------------------------------------------
# Exactness laws
# ------------------------------------------------------------------------------------------


@pytest.mark.parametrize("ties", [False, True])
def test_gsj_exact_for_linear_f_on_uneven_design(ties):
    # GSJ (1986), METHODS.md 7.4: a_i x_{i-1} + b_i x_{i+1} = x_i and a_i + b_i = 1, so a line
    # gives pseudo-residuals of exactly 0 on any design (and, with our tie handling, with ties).
    rng = np.random.default_rng(7)
    x = rng.uniform(-3, 5, 40) ** 3
    if ties:
        x[5:9] = x[0]
        x[20] = x[21]
    y = 2.5 - 1.75 * x
    assert difference_variance(x, y) <= 1e-24 * np.mean(y**2)


@pytest.mark.parametrize("name", list(ESTIMATORS))
def test_unbiased_for_constant_f_exact_trace(name):
    # Each estimator is a quadratic form y^T A y, so E = f^T A f + sigma^2 tr(A) for any
    # uncorrelated homoscedastic errors (standard result: E[eps^T A eps] = sigma^2 tr A).
    # METHODS.md 7.1-7.6 state each is unbiased for constant f: f^T A f = 0 and tr A = 1.
    # tr A = sum_i Q(e_i) with e_i the unit vectors. The design has ties and uneven spacing.
    x = np.array([0.0, 0.5, 0.5, 1.7, 2.0, 2.0, 2.0, 3.1, 4.8, 5.0, 6.2, 6.2])
    X = x[:, None]
    est = ESTIMATORS[name]
    n = x.size
    trace = sum(est(X, np.eye(n)[i]) for i in range(n))
    assert trace == pytest.approx(1.0, rel=1e-12)
    assert est(X, np.full(n, 3.7)) <= 1e-28


def test_gsj_unbiased_for_linear_f_exact_trace():
    # GSJ (1986), METHODS.md 7.4: exactly unbiased for linear f on any design; with ties each
    # group-mean pseudo-residual is reweighted so tr A = 1 still holds (see Notes in the module).
    x = np.array([0.0, 0.1, 0.1, 0.1, 1.0, 2.5, 2.5, 2.6, 9.0])
    n = x.size
    trace = sum(difference_variance(x, np.eye(n)[i]) for i in range(n))
    assert trace == pytest.approx(1.0, rel=1e-12)


def test_rice_constant_f_monte_carlo_mean_is_sigma2():
    # Rice (1984), METHODS.md 7.3: E sigma2_R = sigma^2 exactly for constant f.
    # Tolerance: for Gaussian errors, Var(sigma2_R) = sigma^4 (3n - 4)/(n - 1)^2 (derived here
    # from Isserlis' theorem: Var D_i^2 = 8 sigma^4, Cov(D_i^2, D_{i+1}^2) = 2 sigma^4;
    # -> 3 sigma^4 / n, the HKT limit with delta = 1/4). Four standard errors of the mean.
    rng = np.random.default_rng(987)
    n, reps, sigma = 10, 4000, 1.3
    x = rng.uniform(0, 1, n)
    values = np.array([rice_variance(x, 4.0 + rng.normal(0, sigma, n)) for _ in range(reps)])
    se = sigma**2 * math.sqrt((3 * n - 4) / (n - 1) ** 2 / reps)
    assert abs(values.mean() - sigma**2) <= 4 * se


# ------------------------------------------------------------------------------------------
# Accuracy on simulated data with known sigma
# ------------------------------------------------------------------------------------------


def _noise(rng, kind, sigma, n):
    """Errors with variance sigma^2 and their kurtosis mu4 / sigma^4."""
    if kind == "gaussian":
        return rng.normal(0.0, sigma, n), 3.0
    half_width = sigma * math.sqrt(3.0)  # uniform(-h, h): variance h^2 / 3, mu4 = 9/5 sigma^4
    return rng.uniform(-half_width, half_width, n), 9.0 / 5.0


# Difference sequences d (sum d = 0, sum d^2 = 1) and delta = sum_{l>=1} rho_l^2, as written in
# METHODS.md: Rice (7.3) = (1, -1)/sqrt 2, delta = 1/4; GSJ on equal spacing (7.4) =
# (1, -2, 1)/sqrt 6, delta = 17/36 (7.5); HKT (7.5) tabled sequences, delta = 1/(4m).
SEQUENCES = {
    "rice": ((1 / math.sqrt(2), -1 / math.sqrt(2)), 1 / 4),
    "gsj": ((1 / math.sqrt(6), -2 / math.sqrt(6), 1 / math.sqrt(6)), 17 / 36),
    "hkt1": ((1 / math.sqrt(2), -1 / math.sqrt(2)), 1 / 4),
    "hkt2": (((1 + math.sqrt(5)) / 4, -0.5, (1 - math.sqrt(5)) / 4), 1 / 8),
    "hkt3": ((0.194195, 0.280892, 0.383155, -0.858242), 1 / 12),
}


@pytest.mark.parametrize("kind", ["gaussian", "uniform"])
@pytest.mark.parametrize("name", list(SEQUENCES))
def test_difference_estimators_recover_sigma(name, kind):
    # Equally spaced x and a wiggly f, so the bias from f matters (several SDs for HKT m = 2, 3).
    # With D the (n-m) x n difference matrix, sigma2_m = ||D y||^2 / (n - m), so
    #   E = sigma^2 + ||D f||^2 / (n - m)                      (METHODS.md 7.3-7.5),
    #   Var = [mu4 - sigma^4 + 4 delta sigma^4] / n            (METHODS.md 7.5, noise part)
    #         + 4 sigma^2 ||D^T D f||^2 / (n - m)^2            (the cross term 2 f^T A eps; derived
    #                                                         here, exact for symmetric errors).
    # Tolerance: 4 SDs.
    d, delta = SEQUENCES[name]
    m = len(d) - 1
    rng = np.random.default_rng([424242, zlib.crc32(f"{name}-{kind}".encode())])
    n, sigma = 4000, 0.5
    x = np.linspace(0.0, 1.0, n)
    f = np.sin(2 * np.pi * 150 * x) + 2 * x
    eps, kurtosis = _noise(rng, kind, sigma, n)
    perm = rng.permutation(n)  # the estimators must sort by x themselves
    xp, yp = x[perm], (f + eps)[perm]
    if name == "rice":
        value = rice_variance(xp, yp)
    elif name == "gsj":
        value = difference_variance(xp, yp)
    else:
        value = optimal_difference_variance(xp, yp, order=m)
    Df = sum(dj * f[j : n - m + j] for j, dj in enumerate(d))
    DtDf = np.convolve(Df, d)  # (D^T z)_i = sum_k z_k d_{i-k}
    bias = np.sum(Df**2) / (n - m)
    var = (kurtosis - 1 + 4 * delta) * sigma**4 / n + 4 * sigma**2 * np.sum(DtDf**2) / (n - m) ** 2
    assert abs(value - (sigma**2 + bias)) <= 4 * math.sqrt(var)


def test_gsj_recovers_sigma_on_random_uneven_design():
    # GSJ (1986) on a random design: E = sigma^2 for linear f (METHODS.md 7.4). Each term
    # c_i^2 e_i^2 has variance 2 sigma^4 (Gaussian) and depends only on terms up to lag 2, so
    # by Cauchy-Schwarz Var(mean of N terms) <= 5 * 2 sigma^4 / N (derived here). Four SDs.
    rng = np.random.default_rng(2718)
    n, sigma = 3000, 0.8
    x = rng.exponential(1.0, n)
    y = 1.0 - 3.0 * x + rng.normal(0, sigma, n)
    tol = 4 * sigma**2 * math.sqrt(10 / (n - 2))
    assert abs(difference_variance(x, y) - sigma**2) <= tol


def test_replicates_recover_sigma():
    # Draper & Smith (1998) pure error, METHODS.md 7.1: unbiased for any f; for Gaussian errors
    # SS_pe / sigma^2 ~ chi^2(df), so Var(sigma2_pe) = 2 sigma^4 / df exactly. Four SDs.
    rng = np.random.default_rng(161803)
    groups, size, sigma = 500, 4, 1.7
    levels = rng.uniform(-2, 2, (groups, 2))
    X = np.repeat(levels, size, axis=0)
    y = X[:, 0] ** 3 - 5 * X[:, 1] + rng.normal(0, sigma, groups * size)
    sigma2, df = replicate_variance(X, y)
    assert df == groups * (size - 1)
    assert abs(sigma2 - sigma**2) <= 4 * sigma**2 * math.sqrt(2 / df)


def test_neighbours_recover_sigma():
    # NN estimator, METHODS.md 7.6: E[sigma2_NN | X] = sigma^2 + (1/(2n)) sum (f_i - f_N(i))^2,
    # neighbours from sklearn (reference library). sigma2_NN = eps^T A eps + ..., and for Gaussian
    # eps Var(eps^T A eps) = 2 sigma^4 tr(A^2) (standard quadratic-form result, from memory:
    # Searle, Linear Models). Conditional on X the cross term f^T A eps adds variance
    # 4 sigma^2 ||A f||^2, included below. Four SDs.
    rng = np.random.default_rng(314159)
    n, sigma = 3000, 0.6
    X = rng.uniform(0, 1, (n, 2)) * np.array([1.0, 50.0])
    f = np.sin(3 * X[:, 0]) + (X[:, 1] / 50) ** 2
    y = f + rng.normal(0, sigma, n)
    nbr = _sklearn_neighbours(X)
    rows = np.arange(n)
    V = sp.csr_matrix(
        (np.r_[np.ones(n), -np.ones(n)], (np.r_[rows, rows], np.r_[rows, nbr])), shape=(n, n)
    )
    A = (V.T @ V) / (2 * n)
    bias = float(f @ (A @ f))
    var = 2 * sigma**4 * float(A.multiply(A).sum()) + 4 * sigma**2 * float(np.sum((A @ f) ** 2))
    value = neighbour_variance(X, y)
    assert value == pytest.approx(float(y @ (A @ y)), rel=1e-12)
    assert abs(value - (sigma**2 + bias)) <= 4 * math.sqrt(var)


# ------------------------------------------------------------------------------------------
# estimate_noise: automatic choice, given value, forced methods
# ------------------------------------------------------------------------------------------


def test_auto_picks_replicates_when_genuine_and_precise():
    # METHODS.md 7.1 pure error; our auto rule (estimate_noise Notes): >= 3 replicate groups,
    # >= a third of the rows repeated, and df >= the alternative's effective df.
    X = np.repeat(np.array([[0.0, 1.0], [2.0, 3.0], [5.0, 1.0], [4.0, 4.0]]), 3, axis=0)
    y = np.array([1.0, 2.0, 3.0, 4.0, 7.0, 4.0, 3.0, 3.0, 6.0, 0.0, 1.0, 2.0])
    est = estimate_noise(X, y)
    assert est.method == "replicates"
    assert est.value == pytest.approx((2 + 6 + 6 + 2) / 8, rel=1e-14)  # SS_pe per group, df = 8
    assert est.df == 8.0
    assert "df = 8" in est.detail and "precise as" in est.detail


def test_auto_two_replicate_groups_are_not_enough():
    # Our auto rule: fewer than 3 groups of repeated x -> the alternative, and detail says why.
    X = np.array([[0.0, 1.0], [0.0, 1.0], [2.0, 3.0], [2.0, 3.0], [5.0, 1.0]])
    y = np.array([1.0, 2.0, 4.0, 7.0, 3.0])
    est = estimate_noise(X, y)
    assert est.method == "neighbours"
    assert "only 2 groups of repeated x" in est.detail


def test_auto_picks_differences_for_one_column():
    rng = np.random.default_rng(8)
    x = rng.uniform(0, 1, 50)
    y = x**2 + rng.normal(0, 0.1, 50)
    x[1] = x[0]  # one repeat only: df = 1 < 2, so not replicates (common practice: df >= 2)
    est = estimate_noise(x[:, None], y)
    assert (est.method, est.df) == ("differences", None)
    assert est.value == difference_variance(x, y)


def test_auto_picks_neighbours_for_several_columns():
    rng = np.random.default_rng(9)
    X = rng.normal(size=(60, 3))
    y = X.sum(axis=1) + rng.normal(size=60)
    est = estimate_noise(X, y)
    assert (est.method, est.df) == ("neighbours", None)
    # several predictors: the Gamma-test estimator (METHODS.md 7.6), not the 1-NN one
    assert est.value == neighbour_trend_variance(X, y)
    assert "3 columns" in est.detail and "Gamma-test" in est.detail


def test_auto_falls_back_to_neighbours_with_two_distinct_x():
    x = np.array([0.0, 0.0, 1.0])
    y = np.array([1.0, 2.0, 4.0])
    est = estimate_noise(x, y)
    assert est.method == "neighbours"
    # N = (1, 0, 0): ((1-2)^2 + (2-1)^2 + (4-1)^2) / 6
    assert est.value == pytest.approx(11 / 6, rel=1e-14)


@pytest.mark.parametrize("value", [0.25, 0, 3, np.float64(1.5), np.float32(0.5)])
def test_given_noise_is_a_variance(value):
    est = estimate_noise(None, None, noise=value)
    assert (est.value, est.method, est.df) == (float(value), "given", None)
    assert isinstance(est.value, float)
    assert "variance" in est.detail


def test_forced_methods():
    x = np.array([1.0, 1.0, 2.0, 2.0, 3.0, 3.0])
    y = np.array([1.0, 3.0, 2.0, 4.0, 6.0, 8.0])
    assert estimate_noise(x, y, "replicates").value == pytest.approx(2.0)
    assert estimate_noise(x, y, "differences").value == difference_variance(x, y)
    assert estimate_noise(x, y, "neighbours").value == neighbour_variance(x, y)
    assert estimate_noise(x, y, "auto").method == "replicates"


def test_forced_methods_that_do_not_apply():
    with pytest.raises(ValueError, match=r"noise='replicates'.*all 4 rows are distinct"):
        estimate_noise(np.arange(4.0), np.arange(4.0), "replicates")
    with pytest.raises(ValueError, match=r"noise='differences'.*X has 2 columns"):
        estimate_noise(np.ones((4, 2)), np.arange(4.0), "differences")
    with pytest.raises(ValueError, match=r"at least 3 distinct x values .*; got 2 distinct"):
        estimate_noise(np.array([0.0, 0.0, 1.0]), np.arange(3.0), "differences")


# ------------------------------------------------------------------------------------------
# Property tests
# ------------------------------------------------------------------------------------------


@st.composite
def _data(draw):
    n = draw(st.integers(9, 25))
    # 8 possible x values and n >= 9 rows: at least one repeat, so pure error is defined.
    levels = draw(st.lists(st.floats(-10, 10), min_size=8, max_size=8, unique=True))
    x = np.array(draw(st.lists(st.sampled_from(levels), min_size=n, max_size=n)))
    assume(np.unique(x).size >= 3)
    x2 = np.array(draw(st.lists(st.floats(-5, 5), min_size=n, max_size=n)))
    y = np.array(draw(st.lists(st.floats(-100, 100), min_size=n, max_size=n)))
    return np.column_stack([x, x2]), y


@pytest.mark.parametrize("name", list(ESTIMATORS))
@settings(max_examples=40, deadline=None, database=None, derandomize=True,
          suppress_health_check=[HealthCheck.filter_too_much])  # fmt: skip
@given(
    data=_data(),
    shift=st.floats(-1000, 1000),
    scale=st.floats(0.01, 10),
    sign=st.sampled_from([-1.0, 1.0]),
)
def test_estimator_laws(name, data, shift, scale, sign):
    # Laws of any difference-based quadratic form (METHODS.md 7.1-7.6; weights sum to zero):
    # value >= 0; adding a constant to y changes nothing; multiplying y by c multiplies by c^2.
    X, y = data
    if name != "neighbours":
        X = X[:, :1]  # one predictor (with repeats, so pure error is defined)
    est = ESTIMATORS[name]
    value = est(X, y)
    assert value >= 0
    big = (np.max(np.abs(y)) + abs(shift)) ** 2
    assert math.isclose(est(X, y + shift), value, rel_tol=1e-9, abs_tol=1e-12 * big)
    c = sign * scale
    assert math.isclose(est(X, c * y), c**2 * value, rel_tol=1e-9, abs_tol=1e-12 * big * c**2)


@settings(max_examples=40, deadline=None, database=None, derandomize=True)
@given(data=_data(), seed=st.integers(0, 2**32 - 1))
def test_order_free_estimators_ignore_row_order(data, seed):
    # Pure error (METHODS.md 7.1) depends only on the groups; our GSJ tie handling (group means)
    # makes difference_variance depend only on the (x, y) pairs, not on their order.
    X, y = data[0][:, :1], data[1]
    perm = np.random.default_rng(seed).permutation(y.size)
    a, b = replicate_variance(X, y), replicate_variance(X[perm], y[perm])
    assert a[1] == b[1]
    assert math.isclose(a[0], b[0], rel_tol=1e-9, abs_tol=1e-9)
    assert math.isclose(
        difference_variance(X[:, 0], y),
        difference_variance(X[perm, 0], y[perm]),
        rel_tol=1e-9,
        abs_tol=1e-9,
    )
