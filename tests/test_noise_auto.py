"""Tests for the automatic noise choice, the standard error ``se`` and the Gamma-test estimator.

Sources (METHODS.md section 12 has full references):
  pure error (Draper & Smith 1998)                          -> METHODS.md 7.1
  Gasser, Sroka & Jennen-Steinmetz (1986) pseudo-residuals  -> METHODS.md 7.4
  variance of difference estimators (2 + 4 delta)           -> METHODS.md 7.5
  nearest neighbours and the Gamma test                     -> METHODS.md 7.6
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from complexity.noise import (
    NoiseEstimate,
    difference_variance,
    estimate_noise,
    neighbour_trend_variance,
    neighbour_variance,
    replicate_variance,
)

# ------------------------------------------------------------------------------------------
# noise="auto" with accidental ties and with genuine replicates
# ------------------------------------------------------------------------------------------


def test_auto_ignores_two_accidental_ties():
    # Our auto rule (estimate_noise Notes): pure error on 2 df is far less precise than GSJ
    # (METHODS.md 7.5: effective df about 0.514 (n - 2) for equal spacing).
    rng = np.random.default_rng(48)
    x = np.r_[np.linspace(0.0, 1.0, 48), 0.25, 0.75]
    x[48], x[49] = x[12], x[36]  # two duplicated x values
    y = np.sin(4 * x) + rng.normal(0.0, 0.2, 50)
    est = estimate_noise(x, y)
    assert est.method == "differences"
    assert est.value == difference_variance(x, y)
    assert "not pure error from 4 repeated rows" in est.detail
    assert "df = 2 <" in est.detail and "only 2 groups" in est.detail


def test_auto_accidental_ties_rmse_is_smaller_than_pure_error():
    # Common practice (Monte Carlo): the choice auto makes is the more accurate one here.
    rng = np.random.default_rng(4802)
    x = np.r_[np.linspace(0.0, 1.0, 48), 0.0, 0.0]
    x[48], x[49] = x[12], x[36]
    err_auto, err_pure = [], []
    for _ in range(200):
        y = np.sin(4 * x) + rng.normal(0.0, 0.2, 50)
        err_auto.append(estimate_noise(x, y).value / 0.04 - 1)
        err_pure.append(replicate_variance(x, y)[0] / 0.04 - 1)
    rmse_auto = math.sqrt(np.mean(np.square(err_auto)))
    rmse_pure = math.sqrt(np.mean(np.square(err_pure)))
    assert rmse_auto < 0.5 * rmse_pure


def test_auto_takes_genuine_replicates():
    # METHODS.md 7.1: 17 set points x 3 readings; df = 34, GSJ on 17 group means has few df.
    rng = np.random.default_rng(173)
    x = np.repeat(np.linspace(-10.0, 40.0, 17), 3)
    y = 0.01 * x**2 + rng.normal(0.0, 0.05, x.size)
    est = estimate_noise(x, y)
    assert (est.method, est.df) == ("replicates", 34.0)
    assert est.detail.startswith("pure error from 51 rows in 17 groups of identical x (df = 34)")
    assert "more precise than pseudo-residual differences" in est.detail


def test_auto_engel_like_ties():
    # Simulated after statsmodels' Engel data: 235 rows, 4 tied incomes, 2 of them exact
    # duplicate rows (same y). Our auto rule: 4 df and 8 of 235 rows are not genuine replicates.
    rng = np.random.default_rng(235)
    income = rng.lognormal(6.6, 0.5, 231)
    food = 0.5 * income + rng.normal(0.0, 100.0, 231)
    pick = [10, 50, 90, 130]
    x = np.r_[income, income[pick]]
    y = np.r_[food, food[pick[:2]], food[pick[2:]] + rng.normal(0.0, 100.0, 2)]
    est = estimate_noise(x, y)
    assert est.method == "differences"
    assert "df = 4 <" in est.detail and "only 8 of 235 rows repeated" in est.detail
    # forced pure error reports the duplicated records
    forced = estimate_noise(x, y, "replicates")
    assert "2 of the groups have identical y" in forced.detail


def test_auto_real_engel_data():
    # statsmodels' Engel data (235 rows, 4 tied incomes): auto must not take pure error.
    sm = pytest.importorskip("statsmodels.api")
    try:
        data = sm.datasets.engel.load_pandas().data
    except Exception as exc:  # pragma: no cover - data missing from the install
        pytest.skip(f"Engel data unavailable: {exc}")
    x, y = data["income"].to_numpy(), data["foodexp"].to_numpy()
    est = estimate_noise(x, y)
    assert est.method == "differences"
    assert replicate_variance(x, y)[1] == 4.0
    assert est.value > 5 * replicate_variance(x, y)[0]


def test_auto_pressure_sensor_demo_still_replicates():
    # The package's demo data: 17 set points x 3 readings (tests/test_datasets.py).
    import complexity as cx

    X, y = cx.datasets.pressure_sensor(as_frame=False)
    assert estimate_noise(X, y).method == "replicates"


# ------------------------------------------------------------------------------------------
# The standard error against the Monte-Carlo spread
# ------------------------------------------------------------------------------------------


@pytest.mark.parametrize("kind", ["differences", "replicates", "neighbours"])
def test_se_matches_monte_carlo_sd(kind):
    # se = sqrt(2 / df_eff) * value with df_eff = 1 / tr(A^2) (Var of a Gaussian quadratic form,
    # 2 sigma^4 tr(A^2); METHODS.md 7.5 for difference sequences). Within a factor 1.5.
    rng = np.random.default_rng([7, len(kind)])
    sigma = 0.5
    if kind == "differences":
        X = rng.uniform(0.0, 1.0, 200)
    elif kind == "replicates":
        X = np.repeat(rng.uniform(0.0, 1.0, 40), 3)
    else:
        X = rng.normal(size=(300, 3))
    f = X if X.ndim == 1 else X[:, 0]
    values, ses = [], []
    for _ in range(100 if kind == "neighbours" else 300):
        y = 2.0 * f + rng.normal(0.0, sigma, f.size)
        est = estimate_noise(X, y, kind)
        values.append(est.value)
        ses.append(est.se)
    ratio = np.mean(ses) / np.std(values, ddof=1)
    assert 1 / 1.5 <= ratio <= 1.5


def test_replicates_se_is_exact_chi_square_formula():
    # METHODS.md 7.1: Var(sigma2_pe) = 2 sigma^4 / df for Gaussian errors.
    est = estimate_noise([1, 1, 2, 2, 3, 3], [1, 3, 2, 4, 6, 8], "replicates")
    assert est.se == pytest.approx(2.0 * math.sqrt(2 / 3), rel=1e-14)


def test_gsj_effective_df_equal_spacing():
    # METHODS.md 7.5: GSJ on equal spacing has delta = 17/36, so df_eff -> (n - 2) / (1 + 2 delta)
    # exactly here apart from the ends: 36 N / 70 with N = n - 2 interior points (derived).
    n = 1002
    est = estimate_noise(np.arange(n, dtype=float), np.random.default_rng(1).normal(size=n))
    df_eff = 2 * (est.value / est.se) ** 2
    assert df_eff == pytest.approx(
        (n - 2) ** 2 / ((n - 2) + 2 * (n - 3) * 16 / 36 + 2 * (n - 4) / 36)
    )


# ------------------------------------------------------------------------------------------
# Several predictors: relative bias on known truth
# ------------------------------------------------------------------------------------------


def _truth(rng, n, p):
    X = rng.normal(size=(n, p))
    f = np.sin(X).sum(axis=1) + 0.3 * np.sum(X**2, axis=1) / math.sqrt(p)
    return X, f


@pytest.mark.parametrize(("p", "n"), [(2, 500), (5, 600), (10, 800)])
def test_trend_estimator_relative_bias_within_25_percent(p, n):
    # Gamma test (METHODS.md 7.6) on smooth truths: sigma^2 = Var(f) / 4, so the 1-NN bias
    # (METHODS.md 7.6 formula) is large at 10 predictors. 30 data sets; the mean relative
    # error must be within 25 % plus 3 Monte-Carlo standard errors.
    rng = np.random.default_rng([2025, p])
    rel, rel_nn = [], []
    for _ in range(30):
        X, f = _truth(rng, n, p)
        sigma2 = float(np.var(f)) / 4
        y = f + rng.normal(0.0, math.sqrt(sigma2), n)
        est = estimate_noise(X, y)
        assert est.method == "neighbours" and "Gamma-test" in est.detail
        rel.append(est.value / sigma2 - 1)
        rel_nn.append(neighbour_variance(X, y) / sigma2 - 1)
    mc_se = np.std(rel, ddof=1) / math.sqrt(len(rel))
    assert abs(np.mean(rel)) <= 0.25 + 3 * mc_se
    if p == 10:  # the signal is not negligible: the 1-NN estimator fails the same target
        assert np.mean(rel_nn) > 0.25 + 3 * np.std(rel_nn, ddof=1) / math.sqrt(30)


# ------------------------------------------------------------------------------------------
# neighbour_trend_variance: definition, neighbours, input checks
# ------------------------------------------------------------------------------------------


def _reference_gamma(X, y, k):
    """METHODS.md 7.6 Gamma test, written out with a full sort (ties: lowest index)."""
    Z = (X - X.mean(axis=0)) / X.std(axis=0)
    n = len(y)
    D = ((Z[:, None, :] - Z[None, :, :]) ** 2).sum(axis=2)
    np.fill_diagonal(D, np.inf)
    order = np.lexsort((np.broadcast_to(np.arange(n), (n, n)), D), axis=1)[:, :k]
    delta = np.take_along_axis(D, order, axis=1).mean(axis=0)
    gamma = ((y[order] - y[:, None]) ** 2).mean(axis=0) / 2
    _, intercept = np.polyfit(delta, gamma, 1)
    return max(intercept, 0.0)


def test_trend_matches_reference_definition():
    rng = np.random.default_rng(31)
    X = rng.normal(size=(300, 4)) * np.array([1.0, 10.0, 0.1, 3.0])
    y = np.cos(X[:, 0]) + X[:, 1] / 10 + rng.normal(0.0, 0.3, 300)
    for k in (2, 10, 20):
        assert neighbour_trend_variance(X, y, n_neighbours=k) == pytest.approx(
            _reference_gamma(X, y, k), rel=1e-9
        )


def test_trend_lattice_ties_and_duplicates():
    # METHODS.md 7.6: break ties deterministically (lowest index); duplicated rows act as pure
    # error: with every row in a group of 4 copies and K = 3, gamma(k) is within-group only.
    g = np.stack(np.meshgrid(np.arange(7.0), np.arange(7.0)), axis=-1).reshape(-1, 2)
    y = np.random.default_rng(2).normal(size=49)
    assert neighbour_trend_variance(g, y, n_neighbours=8) == pytest.approx(
        _reference_gamma(g, y, 8), rel=1e-9
    )
    X = np.repeat(np.random.default_rng(3).normal(size=(25, 3)), 4, axis=0)
    y = np.random.default_rng(4).normal(size=100)
    pure = replicate_variance(X, y)[0]  # 3 df per group; mean of (1/2)(y_i - y_j)^2 equals it
    assert neighbour_trend_variance(X, y, n_neighbours=3) == pytest.approx(pure, rel=1e-12)


def test_trend_two_rows_is_first_neighbour():
    X, y = [[0.0, 1.0], [1.0, 0.0]], [1.0, 3.0]
    # one neighbour order: the mean of gamma(1) = ((1 - 3)^2 + (3 - 1)^2) / 4
    assert neighbour_trend_variance(X, y) == neighbour_variance(X, y) == 2.0


@pytest.mark.parametrize(
    ("k", "error", "pattern"),
    [
        (0, ValueError, r"n_neighbours must be an int >= 1 .*got 0"),
        (2.0, TypeError, r"n_neighbours must be an int >= 1 .*got 2\.0"),
        (True, TypeError, r"n_neighbours must be an int >= 1 .*got True"),
    ],
)
def test_trend_bad_n_neighbours(k, error, pattern):
    with pytest.raises(error, match=pattern):
        neighbour_trend_variance(np.zeros((4, 2)), np.arange(4.0), n_neighbours=k)


def test_trend_too_few_rows_and_inputs_untouched():
    with pytest.raises(ValueError, match="at least 2 rows; got 1"):
        neighbour_trend_variance([[1.0, 2.0]], [1.0])
    rng = np.random.default_rng(5)
    X, y = rng.normal(size=(50, 3)), rng.normal(size=50)
    before = X.tobytes(), y.tobytes()
    neighbour_trend_variance(X, y)
    estimate_noise(X, y)
    assert (X.tobytes(), y.tobytes()) == before


# ------------------------------------------------------------------------------------------
# NoiseEstimate.se
# ------------------------------------------------------------------------------------------


def test_se_round_trip_and_old_records():
    est = estimate_noise(np.arange(30.0), np.sin(np.arange(30.0)))
    assert est.se is not None and est.se > 0
    assert NoiseEstimate.from_dict(est.to_dict()) == est
    old = {"value": 1.0, "method": "given", "df": None, "detail": "old"}
    assert NoiseEstimate.from_dict(old).se is None
    assert estimate_noise(None, None, 0.5).se is None
    with pytest.raises(ValueError, match=r"se must be None or a standard error >= 0; got -1\.0"):
        NoiseEstimate(1.0, "given", None, "", se=-1.0)
    with pytest.raises(TypeError, match="se must be a real number; got 'a'"):
        NoiseEstimate(1.0, "given", None, "", se="a")


# ------------------------------------------------------------------------------------------
# Laws (property tests)
# ------------------------------------------------------------------------------------------


@settings(max_examples=30, deadline=None, database=None, derandomize=True)
@given(
    seed=st.integers(0, 2**32 - 1),
    p=st.sampled_from([1, 3]),
    reps=st.sampled_from([1, 3]),
    shift=st.floats(-1000, 1000),
    scale=st.floats(0.01, 10),
)
def test_auto_estimate_laws(seed, p, reps, shift, scale):
    # Every estimator is a quadratic form in differences of y (METHODS.md 7.1-7.6): adding a
    # constant leaves value and se unchanged, scaling y by c scales both by c^2, and the
    # choice of method does not change.
    rng = np.random.default_rng(seed)
    X = np.repeat(rng.normal(size=(12, p)), reps, axis=0)
    y = rng.normal(size=X.shape[0]) * 3
    base = estimate_noise(X, y)
    moved = estimate_noise(X, y + shift)
    scaled = estimate_noise(X, scale * y)
    big = (np.max(np.abs(y)) + abs(shift)) ** 2
    assert moved.method == scaled.method == base.method
    assert math.isclose(moved.value, base.value, rel_tol=1e-7, abs_tol=1e-10 * big)
    assert math.isclose(scaled.value, scale**2 * base.value, rel_tol=1e-9, abs_tol=1e-12)
    assert math.isclose(scaled.se, scale**2 * base.se, rel_tol=1e-9, abs_tol=1e-12)
