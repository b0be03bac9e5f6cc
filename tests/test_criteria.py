"""Tests for complexity.criteria: PRESS/LOOCV, GCV, AIC, AICc, BIC, Cp for every capacity.

References: METHODS.md sections 5 and 6 (worked checks, recomputed there with numpy and
statsmodels 0.15), Allen (1974) for PRESS, Craven & Wahba (1979) for GCV, Hurvich & Tsai (1989)
for AICc, statsmodels OLS as the reference library (a test extra: those checks skip without it),
and the NIST StRD certified models (tests/data, read by tests/_nist.py) for the exact-fit guard.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from _nist import load

import complexity as cx
from complexity.basis import PolynomialBasis
from complexity.criteria import (
    aic,
    aicc,
    bic,
    criteria_table,
    fixed_design_variance,
    gaussian_loglik,
    gcv,
    loocv,
    loocv_defined,
    mallows_cp,
    noise_variance_from_largest,
    rounding_level_rss,
)
from complexity.engine import Problem
from complexity.engine.linear import fit_full
from complexity.lstsq.nested import nested_least_squares

try:
    import statsmodels.api as sm
except ImportError:  # pragma: no cover - statsmodels is a test extra
    sm = None

needs_statsmodels = pytest.mark.skipif(sm is None, reason="statsmodels (test extra) missing")

# toy data of METHODS.md sections 5 and 6
X_TOY = np.arange(5.0)
Y_TOY = np.array([1.0, 3.0, 2.0, 5.0, 4.0])


def _toy_fit():
    Z = PolynomialBasis(2).fit(X_TOY).transform(X_TOY)
    return nested_least_squares(Z, Y_TOY, n_columns_per_capacity=[1, 2, 3])


def test_methods_section5_worked_check() -> None:
    # METHODS.md section 5: straight line, beta = (1.4, 0.8), RSS = 3.6,
    # h = (0.6, 0.3, 0.2, 0.3, 0.6), PRESS = 9.057398, LOOCV = 1.811480, GCV = 2.0.
    fit = _toy_fit()
    np.testing.assert_allclose(fit.fitted_residuals[1], [-0.4, 0.8, -1.0, 1.2, -0.6], atol=1e-13)
    assert fit.rss[1] == pytest.approx(3.6, rel=1e-13)
    np.testing.assert_allclose(fit.leverage[1], [0.6, 0.3, 0.2, 0.3, 0.6], atol=1e-13)
    cv = loocv(fit.fitted_residuals[1], fit.leverage[1])[0]
    assert 5 * cv == pytest.approx(9.057398, abs=5e-7)
    assert cv == pytest.approx(1.811480, abs=5e-7)
    assert gcv([fit.rss[1]], [2], 5)[0] == pytest.approx(2.0, rel=1e-13)
    # mean-only model: LOO residual = (y_i - ybar) n / (n - 1), and PRESS equals GCV's form
    loo0 = (Y_TOY - Y_TOY.mean()) * 5 / 4
    assert loocv(fit.fitted_residuals[0], fit.leverage[0])[0] == pytest.approx(np.mean(loo0**2))
    assert loocv(fit.fitted_residuals[0], fit.leverage[0])[0] == pytest.approx(
        gcv([10.0], [1], 5)[0]
    )


def test_methods_section6_worked_check() -> None:
    # METHODS.md section 6 (n = 5, p = 2, RSS = 3.6): llf = -6.273432, aic = 16.546865,
    # bic = 15.765741, AICc_HT = 33.357480 (generic AICc with k = 3 is 42.546865 = AICc_HT +
    # 5 log 2pi); Cp(line) = 1.172414 and Cp(quadratic) = 3 with the quadratic as the full
    # model (RSS_full = 3.314286, sigma2_hat = 1.657143).
    fit = _toy_fit()
    assert gaussian_loglik([3.6], 5)[0] == pytest.approx(-6.273432, abs=5e-7)
    assert aic([3.6], [2], 5)[0] == pytest.approx(16.546865, abs=5e-7)
    assert bic([3.6], [2], 5)[0] == pytest.approx(15.765741, abs=5e-7)
    assert aicc([3.6], [2], 5)[0] == pytest.approx(33.357480, abs=5e-7)
    assert aicc([3.6], [2], 5)[0] + 5 * np.log(2 * np.pi) == pytest.approx(42.546865, abs=5e-7)
    assert fit.rss[2] == pytest.approx(3.314286, abs=5e-7)
    s2 = noise_variance_from_largest(fit.rss, fit.rank, 5)
    assert s2 == pytest.approx(1.657143, abs=5e-7)
    cp = mallows_cp(fit.rss, fit.rank, 5)
    assert cp[1] == pytest.approx(1.172414, abs=5e-7)
    assert cp[2] == pytest.approx(3.0, rel=1e-12)


def _problem(seed: int, n: int = 25, degree: int = 6):
    rng = np.random.default_rng(seed)
    x = np.sort(rng.uniform(0, 4, n))
    y = np.sin(1.5 * x) + rng.normal(0, 0.3, n)
    Z = PolynomialBasis(degree).fit(x).transform(x)
    fit = nested_least_squares(Z, y, n_columns_per_capacity=list(range(1, degree + 2)))
    return x, y, Z, fit


def test_closed_form_loocv_equals_brute_force_refits() -> None:
    # Allen (1974): PRESS from one fit equals leaving each point out and refitting.
    _x, y, Z, fit = _problem(0)
    got = loocv(fit.fitted_residuals, fit.leverage)
    n = len(y)
    for i, p in enumerate(fit.n_columns):
        errs = []
        for j in range(n):
            keep = np.arange(n) != j
            beta = np.linalg.lstsq(Z[keep, :p], y[keep], rcond=None)[0]
            errs.append(y[j] - Z[j, :p] @ beta)
        assert got[i] == pytest.approx(np.mean(np.square(errs)), rel=1e-9)


@needs_statsmodels
def test_press_matches_statsmodels_influence() -> None:
    # Reference: statsmodels OLSInfluence.ess_press (sum of squared PRESS residuals).
    _x, y, Z, fit = _problem(1)
    got = loocv(fit.fitted_residuals, fit.leverage) * len(y)
    for i, p in enumerate(fit.n_columns):
        ref = sm.OLS(y, Z[:, :p]).fit().get_influence().ess_press
        assert got[i] == pytest.approx(ref, rel=1e-9)


@needs_statsmodels
def test_aic_bic_aicc_match_statsmodels_for_every_degree() -> None:
    # Reference: statsmodels OLS(...).fit().aic / .bic (full Gaussian log-likelihood,
    # k = rank(X), sigma^2 not counted) and, for AICc, statsmodels' generic AICc with sigma^2
    # counted, info_criteria("aicc", dk_params=1), which is AICc_HT + n log(2 pi) (METHODS.md §6).
    _x, y, Z, fit = _problem(2)
    n = len(y)
    a, b, ac = aic(fit.rss, fit.rank, n), bic(fit.rss, fit.rank, n), aicc(fit.rss, fit.rank, n)
    for i, p in enumerate(fit.n_columns):
        ref = sm.OLS(y, Z[:, :p]).fit()
        assert a[i] == pytest.approx(ref.aic, rel=1e-11)
        assert b[i] == pytest.approx(ref.bic, rel=1e-11)
        generic = ref.info_criteria("aicc", dk_params=1)
        assert ac[i] + n * np.log(2 * np.pi) == pytest.approx(generic, rel=1e-11)
        assert gaussian_loglik([fit.rss[i]], n)[0] == pytest.approx(ref.llf, rel=1e-11)


@needs_statsmodels
def test_aic_matches_statsmodels_on_the_raw_power_basis() -> None:
    # The criteria depend on the fitted model only, not on the basis: same numbers as
    # statsmodels on raw powers (well-conditioned small case).
    x, y, _Z, fit = _problem(3, degree=3)
    for i, p in enumerate(fit.n_columns):
        ref = sm.OLS(y, np.vander(x, p, increasing=True)).fit()
        assert aic(fit.rss, fit.rank, len(y))[i] == pytest.approx(ref.aic, rel=1e-9)


@needs_statsmodels
def test_gcv_and_cp_against_statsmodels_quantities() -> None:
    # GCV = n RSS / (n - p)^2 (Craven & Wahba 1979); Cp = RSS_p / s2_full - n + 2p with s2_full
    # the statsmodels scale of the largest model (METHODS.md section 6).
    _x, y, Z, fit = _problem(4)
    n = len(y)
    full = sm.OLS(y, Z).fit()
    g, cp = gcv(fit.rss, fit.rank, n), mallows_cp(fit.rss, fit.rank, n)
    for i, p in enumerate(fit.n_columns):
        ref = sm.OLS(y, Z[:, :p]).fit()
        assert g[i] == pytest.approx(n * ref.ssr / ref.df_resid**2, rel=1e-10)
        assert cp[i] == pytest.approx(ref.ssr / full.scale - n + 2 * p, rel=1e-10)
    assert cp[-1] == pytest.approx(fit.rank[-1], rel=1e-12)


def test_fixed_design_variance_equals_monte_carlo_over_fresh_noise() -> None:
    # Theory: refits on a fixed design with fresh noise have mean (over points) variance of the
    # fitted values sigma^2 p / n. Monte Carlo with 4000 draws; tolerance ~5 Monte Carlo SEs.
    rng = np.random.default_rng(5)
    n, sigma = 20, 0.7
    x = np.linspace(0, 1, n)
    Z = PolynomialBasis(4).fit(x).transform(x)
    truth = np.exp(x)
    draws = truth[None, :] + rng.normal(0, sigma, (4000, n))
    for p in (1, 3, 5):
        Q = np.linalg.qr(Z[:, :p])[0]
        fitted = draws @ Q @ Q.T
        mc = float(np.mean(np.var(fitted, axis=0, ddof=1)))
        expected = fixed_design_variance([p], n, sigma**2)[0]
        assert mc == pytest.approx(expected, rel=0.1)


def test_interpolating_capacity_is_flagged_not_nan() -> None:
    # METHODS.md section 5 pitfall: h_ii = 1 leaves LOO undefined -> inf plus a flag; AICc_HT
    # is undefined for n - p - 2 <= 0 (METHODS.md section 6; inf here); GCV undefined at p = n.
    x = np.arange(4.0)
    y = np.array([0.0, 2.0, 1.0, 3.0])
    Z = PolynomialBasis(3).fit(x).transform(x)
    fit = nested_least_squares(Z, y, n_columns_per_capacity=[1, 2, 3, 4])
    defined = loocv_defined(fit.leverage)
    assert list(defined) == [True, True, True, False]
    cv = loocv(fit.fitted_residuals, fit.leverage)
    assert np.isinf(cv[3]) and np.isfinite(cv[:3]).all()
    assert np.isinf(aicc(fit.rss, fit.rank, 4)[1:]).all()
    assert np.isfinite(aicc(fit.rss, fit.rank, 4)[0])
    assert np.isinf(gcv(fit.rss, fit.rank, 4)[3])
    assert not np.isnan(aic(fit.rss, fit.rank, 4)).any()


def test_criteria_table() -> None:
    _x, y, _Z, fit = _problem(6)
    caps = list(range(len(fit.n_columns)))
    table = criteria_table(
        fit.fitted_residuals, fit.leverage, fit.rank, capacities=caps, rss=fit.rss
    )
    for col in ("loocv", "gcv", "aic", "aicc", "bic", "cp", "fixed_design_variance"):
        assert col in table.columns
    # no y: no exact-fit guard
    assert not table["exact_fit"].any() and table.attrs["rounding_level_rss"] is None
    assert table.index.name == "capacity" and list(table.index) == caps
    n = len(y)
    np.testing.assert_allclose(table["aic"], aic(fit.rss, fit.rank, n))
    np.testing.assert_allclose(table["loocv"], loocv(fit.fitted_residuals, fit.leverage))
    s2 = fit.rss[-1] / (n - fit.rank[-1])
    assert table.attrs["sigma2"] == pytest.approx(s2)
    np.testing.assert_allclose(table["fixed_design_variance"], s2 * fit.rank / n)
    # a given noise variance overrides the largest model's
    other = criteria_table(fit.fitted_residuals, fit.leverage, fit.rank, sigma2=2.0)
    np.testing.assert_allclose(other["cp"], fit.rss / 2.0 - n + 2 * fit.rank, rtol=1e-12)


def test_bad_input() -> None:
    with pytest.raises(TypeError, match="n must be an int"):
        aic([1.0], [1], 5.0)
    with pytest.raises(ValueError, match="same length"):
        bic([1.0, 2.0], [1], 5)
    with pytest.raises(ValueError, match="rss must be >= 0"):
        aic([-1.0], [1], 5)
    with pytest.raises(ValueError, match=r"n_params must lie in 0\.\.n=5"):
        gcv([1.0], [6], 5)
    with pytest.raises(ValueError, match="NaN"):
        aicc([np.nan], [1], 5)
    with pytest.raises(ValueError, match="same shape"):
        loocv(np.zeros((2, 3)), np.zeros((2, 4)))
    with pytest.raises(ValueError, match=r"leverage values must lie in \[0, 1\]"):
        loocv(np.zeros(3), np.array([0.5, 1.5, 0.2]))
    with pytest.raises(ValueError, match="no capacity leaves residual degrees of freedom"):
        mallows_cp([0.0], [3], 3)
    with pytest.raises(ValueError, match="fits exactly"):
        mallows_cp([1.0, 0.0], [1, 2], 3)
    with pytest.raises(ValueError, match="sigma2 must be a finite number > 0"):
        mallows_cp([1.0], [1], 3, sigma2=0.0)
    with pytest.raises(TypeError, match="sigma2 must be a positive number"):
        fixed_design_variance([1], 3, "big")


# --- AICc as Hurvich & Tsai (1989) define it ------------------------------------------------


def test_aicc_is_the_hurvich_tsai_regression_form() -> None:
    # METHODS.md §6: AICc_HT = n log(RSS/n) + n (n + p)/(n - p - 2), equal to the generic
    # AICc = -2 llf + 2 k n/(n - k - 1) with k = p + 1 minus n log(2 pi) (algebra in METHODS).
    rss = np.array([7.5, 3.2, 1.1, 0.4])
    p = np.array([1, 2, 4, 6])
    n = 12
    by_hand = n * np.log(rss / n) + n * (n + p) / (n - p - 2)
    np.testing.assert_allclose(aicc(rss, p, n), by_hand, rtol=1e-14)
    k = p + 1
    generic = -2 * gaussian_loglik(rss, n) + 2 * k * n / (n - k - 1)
    np.testing.assert_allclose(aicc(rss, p, n) + n * np.log(2 * np.pi), generic, rtol=1e-14)


def test_aicc_is_undefined_from_p_equal_n_minus_2() -> None:
    # METHODS.md §6: n - p - 2 <= 0 leaves AICc_HT undefined; documented value +inf, also for
    # an exact fit (RSS = 0), and never NaN.
    n = 10
    got = aicc([2.0, 1.0, 0.5, 0.0, 0.0], [7, 8, 9, 8, 10], n)
    assert np.isfinite(got[0])  # p = n - 3: defined
    assert got[0] == pytest.approx(n * np.log(0.2) + n * 17 / 1)  # METHODS.md §6 formula
    assert np.isposinf(got[1:]).all()  # p = n - 2, n - 1, and exact fits at p >= n - 2
    assert np.isneginf(aicc([0.0], [3], n))[0]  # an exact fit where defined: -inf


# --- exact-fit guard ------------------------------------------------------------------------


def test_rounding_level_rss_formula_and_bad_input() -> None:
    # the documented level (sqrt(n) eps (1 + 2 kappa))^2 sum y^2 (complexity.criteria docs)
    y = np.array([1.0, -2.0, 3.0])
    kappa = np.array([1.0, 5.0])
    eps = np.finfo(float).eps
    expected = (np.sqrt(3) * eps * (1 + 2 * kappa)) ** 2 * 14.0
    np.testing.assert_allclose(rounding_level_rss(y, kappa), expected, rtol=1e-14)
    y_copy, kappa_copy = y.copy(), kappa.copy()
    rounding_level_rss(y, kappa)
    np.testing.assert_array_equal(y, y_copy)  # inputs untouched
    np.testing.assert_array_equal(kappa, kappa_copy)
    with pytest.raises(ValueError, match=r"condition must hold finite .* >= 1.*got"):
        rounding_level_rss(y, [0.5])
    with pytest.raises(ValueError, match=r"condition must hold finite"):
        rounding_level_rss(y, [np.inf])
    with pytest.raises(ValueError, match=r"y must be a non-empty 1-D array.*shape \(0,\)"):
        rounding_level_rss([], [1.0])
    with pytest.raises(ValueError, match="y must be finite"):
        rounding_level_rss([1.0, np.nan])


def test_criteria_table_guard_bad_input() -> None:
    fit = _toy_fit()
    args = (fit.fitted_residuals, fit.leverage, fit.rank)
    with pytest.raises(ValueError, match=r"y must be 1-D with one value per sample \(5"):
        criteria_table(*args, y=np.ones(4))
    with pytest.raises(ValueError, match=r"one condition number per capacity \(3\)"):
        criteria_table(*args, y=Y_TOY, condition=[1.0, 2.0])
    with pytest.raises(ValueError, match="condition must hold finite"):
        criteria_table(*args, condition=[1.0, 0.1, 2.0])


def _full_fit(X: np.ndarray, y: np.ndarray, degrees: range):
    ladder = cx.PolynomialLadder(degrees)
    problem = Problem(
        ladder, ladder.build(X), X, y, X, y, cx.Bootstrap(5), np.random.SeedSequence(0), X
    )
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        return fit_full(problem)


CRITERIA = ("loocv", "gcv", "aic", "aicc", "bic", "cp")


@pytest.mark.parametrize("name", ["Wampler1", "Wampler2"])
def test_exact_polynomial_data_every_criterion_picks_the_certified_degree(name: str) -> None:
    # NIST StRD: Wampler1 and Wampler2 are exact quintics (certified residual SD 0); on the
    # ladder 0..9 the RSS from degree 5 on is rounding noise and every criterion must pick 5.
    case = load(name)
    y_before = case.y.copy()
    full = _full_fit(case.X, case.y, range(10))
    np.testing.assert_array_equal(case.y, y_before)  # input not modified
    assert full.diagnostics["exact_fit"].tolist() == [False] * 5 + [True] * 5
    for rule in CRITERIA:
        assert int(np.argmin(full.criteria[rule].to_numpy())) == 5, rule
    assert len(full.notes) == 1
    assert "from degree 5 on" in full.notes[0] and "simplest such degree, 5" in full.notes[0]
    # the penalties alone order the exact capacities: each criterion grows past degree 5
    for rule in ("gcv", "aic", "bic", "cp"):
        assert (np.diff(full.criteria[rule].to_numpy()[5:]) > 0).all(), rule


@pytest.mark.parametrize("name", ["Wampler1", "Wampler2"])
def test_exact_polynomial_data_through_sweep_rules(name: str) -> None:
    # NIST StRD certified degree 5, through the public sweep; the rules table reads the
    # criterion columns, so every rule (resampling rules included) picks 5.
    case = load(name)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        result = cx.sweep(
            cx.PolynomialLadder(range(10)), case.X, case.y, plan=cx.Bootstrap(20), random_state=0
        )
    picks = result.rules["capacity"].to_dict()
    assert {rule: picks[rule] for rule in CRITERIA} == dict.fromkeys(CRITERIA, 5)
    assert result.curves["exact_fit"].tolist() == [False] * 5 + [True] * 5


@pytest.mark.parametrize(
    ("name", "degrees"),
    [("Pontius", range(10)), ("Filip", range(12)), ("Wampler3", range(10)), ("Norris", range(6))],
)
def test_noisy_nist_data_is_not_flagged_exact(name: str, degrees: range) -> None:
    # NIST StRD Pontius, Filip, Wampler3 and Norris have a certified residual SD > 0: no
    # capacity fits them exactly, so the guard must leave every capacity and criterion alone.
    case = load(name)
    assert case.residual_sd > 0  # NIST certified value
    full = _full_fit(case.X, case.y, degrees)
    assert not full.diagnostics["exact_fit"].any()
    assert full.notes == []


def test_guard_leaves_noise_just_above_rounding_alone() -> None:
    # Wampler1 (NIST, exact quintic) plus noise of 1e-9 of the data's RMS: tiny but real, about
    # 1e10 times the rounding level, so nothing is exact and the criteria see true RSS values.
    case = load("Wampler1")
    rng = np.random.default_rng(11)
    y = case.y + 1e-9 * np.sqrt(np.mean(case.y**2)) * rng.standard_normal(case.y.size)
    full = _full_fit(case.X, y, range(10))
    assert not full.diagnostics["exact_fit"].any()
    exact = _full_fit(case.X, case.y, range(10))
    np.testing.assert_allclose(  # below degree 5 the guard changes nothing (METHODS.md §6)
        full.criteria["aic"].to_numpy()[:5], exact.criteria["aic"].to_numpy()[:5], rtol=1e-6
    )


def test_guard_table_values_are_the_rounding_level() -> None:
    # Design check (complexity.criteria docs): at an exact capacity the criteria are evaluated at
    # RSS = tau_k, LOOCV at tau_k / (n min(1 - h)^2); the rss column keeps the computed RSS.
    x = np.linspace(-1, 1, 9)
    y = 2.0 - 0.5 * x + 0.25 * x**2  # an exact quadratic by construction
    Z = PolynomialBasis(4).fit(x).transform(x)
    fit = nested_least_squares(Z, y, n_columns_per_capacity=[1, 2, 3, 4, 5])
    t = criteria_table(
        fit.fitted_residuals, fit.leverage, fit.rank, rss=fit.rss, y=y, condition=fit.condition
    )
    tau = rounding_level_rss(y, fit.condition)
    exact = t["exact_fit"].to_numpy()
    assert exact.tolist() == [False, False, True, True, True]
    np.testing.assert_array_equal(t["rss"].to_numpy(), fit.rss)
    np.testing.assert_allclose(t["aic"][exact], aic(tau, fit.rank, 9)[exact], rtol=1e-14)
    np.testing.assert_allclose(t["aicc"][exact], aicc(tau, fit.rank, 9)[exact], rtol=1e-14)
    worst = tau / (9 * np.min(1 - fit.leverage, axis=1) ** 2)
    np.testing.assert_allclose(t["loocv"][exact], worst[exact], rtol=1e-14)
    np.testing.assert_allclose(t["gcv"][~exact], gcv(fit.rss, fit.rank, 9)[~exact], rtol=1e-14)
    assert t.attrs["sigma2"] == pytest.approx(tau[-1] / (9 - 5), rel=1e-14)
    for rule in CRITERIA:
        assert int(np.argmin(t[rule].to_numpy())) == 2, rule


def test_guard_with_all_zero_response_stays_finite() -> None:
    # y = 0 fits exactly at every capacity; the criteria stay finite (no -inf) and pick the
    # simplest capacity (common practice: prefer the simplest model on ties).
    x = np.linspace(0, 1, 8)
    y = np.zeros(8)
    Z = PolynomialBasis(2).fit(x).transform(x)
    fit = nested_least_squares(Z, y, n_columns_per_capacity=[1, 2, 3])
    t = criteria_table(fit.fitted_residuals, fit.leverage, fit.rank, y=y, condition=fit.condition)
    assert t["exact_fit"].all()
    for rule in CRITERIA:
        values = t[rule].to_numpy()
        assert np.isfinite(values).all() and int(np.argmin(values)) == 0, rule
