"""Tests for complexity.criteria: PRESS/LOOCV, GCV, AIC, AICc, BIC, Cp for every capacity.

References: METHODS.md sections 5 and 6 (worked checks, recomputed there with numpy and
statsmodels 0.15), Allen (1974) for PRESS, Craven & Wahba (1979) for GCV, and statsmodels OLS as
the reference library.
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm

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
)
from complexity.engine.linear import nested_least_squares

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
    np.testing.assert_allclose(fit.residuals[1], [-0.4, 0.8, -1.0, 1.2, -0.6], atol=1e-13)
    assert fit.rss[1] == pytest.approx(3.6, rel=1e-13)
    np.testing.assert_allclose(fit.leverage[1], [0.6, 0.3, 0.2, 0.3, 0.6], atol=1e-13)
    cv = loocv(fit.residuals[1], fit.leverage[1])[0]
    assert 5 * cv == pytest.approx(9.057398, abs=5e-7)
    assert cv == pytest.approx(1.811480, abs=5e-7)
    assert gcv([fit.rss[1]], [2], 5)[0] == pytest.approx(2.0, rel=1e-13)
    # mean-only model: LOO residual = (y_i - ybar) n / (n - 1), and PRESS equals GCV's form
    loo0 = (Y_TOY - Y_TOY.mean()) * 5 / 4
    assert loocv(fit.residuals[0], fit.leverage[0])[0] == pytest.approx(np.mean(loo0**2))
    assert loocv(fit.residuals[0], fit.leverage[0])[0] == pytest.approx(gcv([10.0], [1], 5)[0])


def test_methods_section6_worked_check() -> None:
    # METHODS.md section 6 (n = 5, p = 2, RSS = 3.6): llf = -6.273432, aic = 16.546865,
    # bic = 15.765741, aicc = 22.546865; Cp(line) = 1.172414 and Cp(quadratic) = 3 with the
    # quadratic as the full model (RSS_full = 3.314286, sigma2_hat = 1.657143).
    fit = _toy_fit()
    assert gaussian_loglik([3.6], 5)[0] == pytest.approx(-6.273432, abs=5e-7)
    assert aic([3.6], [2], 5)[0] == pytest.approx(16.546865, abs=5e-7)
    assert bic([3.6], [2], 5)[0] == pytest.approx(15.765741, abs=5e-7)
    assert aicc([3.6], [2], 5)[0] == pytest.approx(22.546865, abs=5e-7)
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
    got = loocv(fit.residuals, fit.leverage)
    n = len(y)
    for i, p in enumerate(fit.n_columns):
        errs = []
        for j in range(n):
            keep = np.arange(n) != j
            beta = np.linalg.lstsq(Z[keep, :p], y[keep], rcond=None)[0]
            errs.append(y[j] - Z[j, :p] @ beta)
        assert got[i] == pytest.approx(np.mean(np.square(errs)), rel=1e-9)


def test_press_matches_statsmodels_influence() -> None:
    # Reference: statsmodels OLSInfluence.ess_press (sum of squared PRESS residuals).
    _x, y, Z, fit = _problem(1)
    got = loocv(fit.residuals, fit.leverage) * len(y)
    for i, p in enumerate(fit.n_columns):
        ref = sm.OLS(y, Z[:, :p]).fit().get_influence().ess_press
        assert got[i] == pytest.approx(ref, rel=1e-9)


def test_aic_bic_aicc_match_statsmodels_for_every_degree() -> None:
    # Reference: statsmodels OLS(...).fit().aic / .bic and .info_criteria("aicc")
    # (full Gaussian log-likelihood, k = rank(X), sigma^2 not counted).
    _x, y, Z, fit = _problem(2)
    n = len(y)
    a, b, ac = aic(fit.rss, fit.rank, n), bic(fit.rss, fit.rank, n), aicc(fit.rss, fit.rank, n)
    for i, p in enumerate(fit.n_columns):
        ref = sm.OLS(y, Z[:, :p]).fit()
        assert a[i] == pytest.approx(ref.aic, rel=1e-11)
        assert b[i] == pytest.approx(ref.bic, rel=1e-11)
        assert ac[i] == pytest.approx(ref.info_criteria("aicc"), rel=1e-11)
        assert gaussian_loglik([fit.rss[i]], n)[0] == pytest.approx(ref.llf, rel=1e-11)


def test_aic_matches_statsmodels_on_the_raw_power_basis() -> None:
    # The criteria depend on the fitted model only, not on the basis: same numbers as
    # statsmodels on raw powers (well-conditioned small case).
    x, y, _Z, fit = _problem(3, degree=3)
    for i, p in enumerate(fit.n_columns):
        ref = sm.OLS(y, np.vander(x, p, increasing=True)).fit()
        assert aic(fit.rss, fit.rank, len(y))[i] == pytest.approx(ref.aic, rel=1e-9)


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
    # METHODS.md section 5 pitfall: h_ii = 1 leaves LOO undefined -> inf plus a flag; AICc is
    # undefined for n - p - 1 <= 0 (inf, as statsmodels returns); GCV undefined at p = n.
    x = np.arange(4.0)
    y = np.array([0.0, 2.0, 1.0, 3.0])
    Z = PolynomialBasis(3).fit(x).transform(x)
    fit = nested_least_squares(Z, y, n_columns_per_capacity=[1, 2, 3, 4])
    defined = loocv_defined(fit.leverage)
    assert list(defined) == [True, True, True, False]
    cv = loocv(fit.residuals, fit.leverage)
    assert np.isinf(cv[3]) and np.isfinite(cv[:3]).all()
    assert np.isinf(aicc(fit.rss, fit.rank, 4)[2:]).all()
    assert np.isinf(gcv(fit.rss, fit.rank, 4)[3])
    assert not np.isnan(aic(fit.rss, fit.rank, 4)).any()


def test_criteria_table() -> None:
    _x, y, _Z, fit = _problem(6)
    caps = list(range(len(fit.n_columns)))
    table = criteria_table(fit.residuals, fit.leverage, fit.rank, capacities=caps, rss=fit.rss)
    for col in ("loocv", "gcv", "aic", "aicc", "bic", "cp", "fixed_design_variance"):
        assert col in table.columns
    assert table.index.name == "capacity" and list(table.index) == caps
    n = len(y)
    np.testing.assert_allclose(table["aic"], aic(fit.rss, fit.rank, n))
    np.testing.assert_allclose(table["loocv"], loocv(fit.residuals, fit.leverage))
    s2 = fit.rss[-1] / (n - fit.rank[-1])
    assert table.attrs["sigma2"] == pytest.approx(s2)
    np.testing.assert_allclose(table["fixed_design_variance"], s2 * fit.rank / n)
    # a given noise variance overrides the largest model's
    other = criteria_table(fit.residuals, fit.leverage, fit.rank, sigma2=2.0)
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
