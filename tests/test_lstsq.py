"""Tests for complexity.lstsq: nested least squares from one QR, coefficients in user units.

The main outside reference is the NIST StRD linear least-squares suite (tests/data, certified
values computed by NIST in multiple precision); statsmodels OLS is the reference library.
"""

from __future__ import annotations

import hashlib
import math

import numpy as np
import pytest
import statsmodels.api as sm
from _nist import DATA_DIR, NAMES, digits, load, lre
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.linear_model import LinearRegression
from sklearn.pipeline import Pipeline

from complexity.basis import LegendreFeatures, PolynomialBasis
from complexity.lstsq.coefficients import (
    fit_linear,
    fit_polynomial,
    map_coefficients,
    user_coefficients,
    user_units_problem,
)
from complexity.lstsq.design import FeatureDesign, PolynomialDesign, scaled_design
from complexity.lstsq.nested import nested_least_squares

# ---------------------------------------------------------------- NIST StRD

# Smallest LRE required (digits), from the table "Digits a careful float64 implementation
# reaches" in the project's NIST reference notes (tests/data/README.md gives the data source):
# (coefficients, standard deviations and residual SD).
NIST_DIGITS = {
    "Norris": (12, 13),
    "Pontius": (12, 13),
    "NoInt1": (12, 13),
    "NoInt2": (12, 13),
    "Filip": (12, 13),
    "Longley": (12, 13),
    "Wampler1": (9, 13),
    "Wampler2": (12, 13),
    "Wampler3": (9, 13),
    "Wampler4": (9, 13),
    "Wampler5": (7, 13),
}
# Wampler1 fits exactly: certified SDs are 0, compared with an absolute error (NIST notes).
WAMPLER1_ABS = 1e-8

# sha256 of the original NIST files (tests/data/README.md)
NIST_SHA256 = {
    "Norris": "5ab6906c68a9c4b2eb1661c0cd7d2a09f5a469a6d4e05b6b691f190f5f7b944f",
    "Pontius": "de60baa5dc66fd804f9316f895bc5aa2b8f791c09d1ecc1ec39f8b199b8c15c7",
    "NoInt1": "d8234c428dedaa9de23b67df7d04aeee83befae73ceb6b38321b224955a9b667",
    "NoInt2": "a71c2810b1edcef8fec6b864c20c5f9d9908e530282a174772ce610999ca7c69",
    "Filip": "403b34689e401d915cb28bd69311d3ca5c3007d88d3b670b00e3203042315072",
    "Longley": "fc4b0c824f8f0b834eb8e7d1c4c7e0b3cebdd7987bcb085e8f5e1007582480ea",
    "Wampler1": "8bcd6f00dbe8c307ebc5c971e12b950eb3cdb75afbc2b38573082b5fcb0d7fbc",
    "Wampler2": "01ba5f08b5b9f84431f3754216e006939a80264a1caa69fe08b3cbc543f9ee3e",
    "Wampler3": "c5b025f6ebf0365de92d80e478ad826b01a6dfdafb71964ea8bae7eec993ce53",
    "Wampler4": "dcff32075a52ecf31af70dad340776237544b1a29b5034a40f8b3e6b607cf9c1",
    "Wampler5": "c4e260a6638db61287bfea75a2dd3b324c86c5d40931ddc6d8fab0c0305ffa39",
}


def _report(name: str):
    """Fit one NIST model in user units (the model the certified values are for)."""
    case = load(name)
    if case.polynomial_degree is not None:  # y = B0 + B1 x + ... + Bd x^d
        return case, fit_polynomial(case.X[:, 0], case.y, degree=case.polynomial_degree)
    # NoInt1/NoInt2 (through the origin) and Longley (6 predictors + intercept)
    return case, fit_linear(case.X, case.y, fit_intercept=case.intercept)


def _engine_only(name: str):
    """The same model from nested_least_squares + map_coefficients (no refinement)."""
    case = load(name)
    if case.polynomial_degree is not None:
        basis = PolynomialBasis(case.polynomial_degree).fit(case.X)
        Z = basis.transform(case.X)
        fit = nested_least_squares(Z, case.y, n_columns_per_capacity=[Z.shape[1]])
        return map_coefficients(fit, 0, basis.monomial_matrix())
    design = scaled_design(case.X, fit_intercept=case.intercept)
    Z = design.transform(case.X)
    fit = nested_least_squares(Z, case.y, n_columns_per_capacity=[Z.shape[1]])
    return map_coefficients(fit, 0, design.to_user_matrix(Z.shape[1]))


@pytest.mark.parametrize("name", NAMES)
def test_nist_files_are_the_original_bytes(name: str) -> None:
    data = (DATA_DIR / f"{name}.dat").read_bytes()
    assert hashlib.sha256(data).hexdigest() == NIST_SHA256[name]
    assert b"\r\n" in data  # CRLF kept


@pytest.mark.parametrize("name", NAMES)
def test_nist_certified_values(name: str) -> None:
    case, got = _report(name)
    coef_need, sd_need = NIST_DIGITS[name]
    assert got.coef.shape == case.coef.shape
    assert digits(lre(got.coef, case.coef)) >= coef_need
    if name == "Wampler1":
        assert np.max(np.abs(got.coef_sd - case.coef_sd)) <= WAMPLER1_ABS
        assert abs(got.residual_sd - case.residual_sd) <= WAMPLER1_ABS
    else:
        assert digits(lre(got.coef_sd, case.coef_sd)) >= sd_need
        assert digits(lre(got.residual_sd, case.residual_sd)) >= sd_need


@pytest.mark.parametrize("name", NAMES)
def test_nist_engine_standard_deviations(name: str) -> None:
    # The plain one-QR fit, mapped back without refinement, already gets the SDs and residual SD.
    case = load(name)
    got = _engine_only(name)
    _, sd_need = NIST_DIGITS[name]
    if name == "Wampler1":
        assert np.max(np.abs(got.coef_sd - case.coef_sd)) <= WAMPLER1_ABS
        assert abs(got.residual_sd - case.residual_sd) <= WAMPLER1_ABS
    else:
        assert digits(lre(got.coef_sd, case.coef_sd)) >= sd_need
        assert digits(lre(got.residual_sd, case.residual_sd)) >= sd_need


def test_nist_digits_table(capsys) -> None:
    """Print the digits reached on every NIST data set (visible in normal pytest output)."""
    rows = []
    for name in NAMES:
        case, got = _report(name)
        plain = _engine_only(name)
        rows.append(
            (
                name,
                digits(lre(got.coef, case.coef)),
                digits(lre(plain.coef, case.coef)),
                digits(lre(got.coef_sd, case.coef_sd)),
                digits(lre(got.residual_sd, case.residual_sd)),
                NIST_DIGITS[name],
            )
        )
    lines = [
        "",
        "NIST StRD linear least squares: digits (min LRE; 15 = all certified digits;",
        "Wampler1 SDs are -log10 of the absolute error because the certified value is 0)",
        f"{'data set':<10}{'coef':>7}{'coef(1 QR)':>12}{'coef SD':>9}{'resid SD':>10}{'need':>10}",
    ]
    for name, c, c0, s, r, need in rows:
        lines.append(f"{name:<10}{c:7.2f}{c0:12.2f}{s:9.2f}{r:10.2f}{need!s:>10}")
    with capsys.disabled():
        print("\n".join(lines))
    assert all(c >= need[0] for _, c, _, _, _, need in rows)


def test_longley_feature_ladder_matches_statsmodels_for_every_count() -> None:
    # Reference: statsmodels OLS on the raw predictors (first k of 6, with a constant).
    case = load("Longley")
    design = scaled_design(case.X, fit_intercept=True)
    Z = design.transform(case.X)
    fit = nested_least_squares(Z, case.y, n_columns_per_capacity=list(range(1, 8)))
    for i, k in enumerate(range(0, 7)):
        ref = sm.OLS(case.y, sm.add_constant(case.X[:, :k], has_constant="add")).fit()
        assert fit.rss[i] == pytest.approx(ref.ssr, rel=1e-9)
        got = map_coefficients(fit, i, design.to_user_matrix(k + 1))
        np.testing.assert_allclose(got.coef, ref.params, rtol=1e-7)
        np.testing.assert_allclose(got.coef_sd, ref.bse, rtol=1e-7)


# ---------------------------------------------------------------- one QR, every capacity


def _random_problem(seed: int, n: int = 40, P: int = 7):
    rng = np.random.default_rng(seed)
    x = np.sort(rng.uniform(-2, 3, n))
    basis = PolynomialBasis(P - 1).fit(x)
    Z = basis.transform(x)
    y = np.cos(x) + rng.normal(0, 0.2, n)
    return Z, y


def test_every_capacity_equals_its_own_lstsq_and_hat_matrix() -> None:
    # METHODS.md section 9: one QR gives every leading-block fit; check against separate
    # numpy.linalg.lstsq solves and explicit hat matrices H = Z (Z^T Z)^-1 Z^T.
    Z, y = _random_problem(0)
    caps = [1, 2, 3, 5, 7]
    fit = nested_least_squares(Z, y, n_columns_per_capacity=caps)
    for i, p in enumerate(caps):
        Zk = Z[:, :p]
        beta = np.linalg.lstsq(Zk, y, rcond=None)[0]
        H = Zk @ np.linalg.solve(Zk.T @ Zk, Zk.T)
        np.testing.assert_allclose(fit.coef[i, :p], beta, rtol=1e-10, atol=1e-12)
        assert np.all(fit.coef[i, p:] == 0)
        np.testing.assert_allclose(fit.fitted[i], Zk @ beta, atol=1e-12)
        np.testing.assert_allclose(fit.leverage[i], np.diag(H), atol=1e-12)
        assert fit.rss[i] == pytest.approx(np.sum((y - Zk @ beta) ** 2), rel=1e-10)
        assert fit.rank[i] == p and not fit.rank_deficient[i]
        assert fit.condition[i] == pytest.approx(np.linalg.cond(Zk), rel=1e-8)
    assert list(fit.residual_dof) == [40 - p for p in caps]


def test_covariance_matches_statsmodels_on_the_design() -> None:
    # Reference: statsmodels OLS(y, Z_k).fit().cov_params(), scale = RSS / (n - p).
    Z, y = _random_problem(1)
    caps = [1, 3, 6]
    fit = nested_least_squares(Z, y, n_columns_per_capacity=caps)
    cov = fit.cov
    for i, p in enumerate(caps):
        ref = sm.OLS(y, Z[:, :p]).fit()
        np.testing.assert_allclose(cov[i, :p, :p], ref.cov_params(), rtol=1e-9, atol=1e-15)
        assert fit.sigma2[i] == pytest.approx(ref.scale, rel=1e-10)


def test_power_basis_covariance_matches_statsmodels() -> None:
    # Well-conditioned small case: statsmodels OLS on the raw power design [1, x, x^2, x^3].
    rng = np.random.default_rng(2)
    x = np.sort(rng.uniform(0, 1.5, 30))
    y = 1 - x + 2 * x**3 + rng.normal(0, 0.1, 30)
    got = fit_polynomial(x, y, degree=3)
    ref = sm.OLS(y, np.vander(x, 4, increasing=True)).fit()
    np.testing.assert_allclose(got.coef, ref.params, rtol=1e-9)
    np.testing.assert_allclose(got.cov, ref.cov_params(), rtol=1e-8)
    np.testing.assert_allclose(got.coef_sd, ref.bse, rtol=1e-9)
    assert got.residual_sd == pytest.approx(math.sqrt(ref.scale), rel=1e-12)


@pytest.mark.filterwarnings("ignore:The design matrix is rank-deficient")
def test_rank_deficient_capacity_matches_statsmodels_pinv() -> None:
    # A repeated column: statsmodels solves with the pseudo-inverse and counts the numerical
    # rank; we flag the capacity and do the same through an SVD of the R block.
    rng = np.random.default_rng(3)
    A = rng.normal(size=(25, 3))
    Z = np.column_stack([A, A[:, 1], rng.normal(size=25)])
    y = rng.normal(size=25)
    fit = nested_least_squares(Z, y, n_columns_per_capacity=[3, 4, 5])
    assert list(fit.rank_deficient) == [False, True, True]
    assert list(fit.rank) == [3, 3, 4]
    for i, p in enumerate([3, 4, 5]):
        ref = sm.OLS(y, Z[:, :p]).fit()
        assert fit.rss[i] == pytest.approx(ref.ssr, rel=1e-10)
        np.testing.assert_allclose(fit.coef[i, :p], ref.params, rtol=1e-8, atol=1e-12)
        np.testing.assert_allclose(fit.fitted[i], ref.fittedvalues, atol=1e-12)
        np.testing.assert_allclose(fit.cov[i, :p, :p], ref.cov_params(), rtol=1e-8, atol=1e-14)
        np.testing.assert_allclose(fit.leverage[i], ref.get_influence().hat_matrix_diag, atol=1e-12)
    assert fit.condition[1] > 1e12


def test_model_through_the_origin_scales_without_centring() -> None:
    x = np.array([[1.0], [2.0], [4.0], [5.0]])
    y = np.array([2.1, 3.9, 8.2, 9.8])
    got = fit_linear(x, y, fit_intercept=False)
    ref = sm.OLS(y, x).fit()  # no constant
    np.testing.assert_allclose(got.coef, ref.params, rtol=1e-12)
    np.testing.assert_allclose(got.coef_sd, ref.bse, rtol=1e-12)


# ---------------------------------------------------------------- laws (hypothesis)


@st.composite
def _design_points(draw):
    low = draw(st.sampled_from([0.0, -50.0, 1e6, 1e3]))
    width = draw(st.sampled_from([1.0, 1e3, 1e-2]))
    m = draw(st.integers(2, 9))
    grid = draw(st.lists(st.integers(0, 40), min_size=m, max_size=m, unique=True))
    x = low + width * np.array(sorted(grid), dtype=float) / 40.0
    seed = draw(st.integers(0, 2**32 - 1))
    return x, np.random.default_rng(seed).normal(0, 1, m) * 10.0


@settings(max_examples=30, deadline=None)
@given(_design_points())
def test_training_rss_never_rises_with_degree_and_vanishes_at_interpolation(data) -> None:
    # Law (nested least squares on the same training set): RSS_d is non-increasing in d; with
    # m distinct x, degree m - 1 interpolates (RSS = 0). Holds for x far from zero as well.
    x, y = data
    m = len(x)
    basis = PolynomialBasis(m - 1).fit(x)
    Z = basis.transform(x)
    fit = nested_least_squares(Z, y, n_columns_per_capacity=list(range(1, m + 1)))
    scale = float(np.sum(y**2))
    assert np.all(np.diff(fit.rss) <= 1e-12 * scale)
    # the direct residual sum of squares agrees with the tail-sum RSS
    np.testing.assert_allclose(
        np.sum(fit.fitted_residuals**2, axis=1), fit.rss, rtol=1e-8, atol=1e-20 * scale + 1e-24
    )
    assert np.max(np.abs(fit.fitted_residuals[-1])) <= 1e-8 * np.max(np.abs(y))
    # the scikit-learn route (LegendreFeatures + LinearRegression) obeys the same law
    rss_pipe = []
    for d in range(m):
        model = Pipeline(
            [
                ("legendre", LegendreFeatures(d, basis.domain_)),
                ("ls", LinearRegression(fit_intercept=False)),
            ]
        ).fit(x[:, None], y)
        rss_pipe.append(float(np.sum((y - model.predict(x[:, None])) ** 2)))
    assert np.all(np.diff(rss_pipe) <= 1e-9 * scale)
    assert rss_pipe[-1] <= 1e-14 * scale


# ---------------------------------------------------------------- bad input


def test_bad_input_messages() -> None:
    Z = np.ones((5, 2))
    Z[:, 1] = np.arange(5.0)
    y = np.arange(5.0)
    with pytest.raises(ValueError, match="must match"):
        nested_least_squares(Z, y[:4], n_columns_per_capacity=[1])
    with pytest.raises(ValueError, match="more columns"):
        nested_least_squares(Z[:1], y[:1], n_columns_per_capacity=[1])
    with pytest.raises(ValueError, match=r"lie in 1\.\.2"):
        nested_least_squares(Z, y, n_columns_per_capacity=[3])
    with pytest.raises(TypeError, match="hold ints"):
        nested_least_squares(Z, y, n_columns_per_capacity=[1.0])
    with pytest.raises(TypeError, match="sequence of ints"):
        nested_least_squares(Z, y, n_columns_per_capacity=2)
    with pytest.raises(ValueError, match="NaN"):
        nested_least_squares(Z, np.array([0, 1, np.nan, 3, 4.0]), n_columns_per_capacity=[1])
    with pytest.raises(ValueError, match="constant"):
        scaled_design(np.column_stack([np.arange(5.0), np.ones(5)]))
    with pytest.raises(TypeError, match="fit_intercept"):
        scaled_design(Z, fit_intercept="yes")
    fit = nested_least_squares(Z, y, n_columns_per_capacity=[1, 2])
    with pytest.raises(ValueError, match="shape"):
        map_coefficients(fit, 0, np.eye(2))
    with pytest.raises(ValueError, match="needs 3 coefficients but there are only 3"):
        fit_polynomial([0.0, 1.0, 2.0], [1.0, 0.0, 1.0], degree=2)


def test_saturated_capacity_has_no_noise_estimate() -> None:
    x = np.array([0.0, 1.0, 2.0])
    Z = PolynomialBasis(2).fit(x).transform(x)
    fit = nested_least_squares(Z, [1.0, 0.0, 1.0], n_columns_per_capacity=[2, 3])
    assert fit.residual_dof[1] == 0 and np.isnan(fit.sigma2[1])
    assert fit.rss[1] == 0.0
    with pytest.raises(ValueError, match="no residual degrees of freedom"):
        map_coefficients(fit, 1, np.eye(3))


def test_inputs_are_not_modified() -> None:
    Z, y = _random_problem(4)
    Z0, y0 = Z.copy(), y.copy()
    nested_least_squares(Z, y, n_columns_per_capacity=[2, 4])
    fit_polynomial(Z[:, 1], y, degree=3)
    np.testing.assert_array_equal(Z, Z0)
    np.testing.assert_array_equal(y, y0)


# ---------------------------------------------------------------- designs and the power basis


def test_feature_design_keeps_a_constant_column_only_when_asked() -> None:
    X = np.column_stack([np.arange(6.0), np.full(6, 2.0)])
    lenient = FeatureDesign.from_data(X, (0, 1), (2, 3), strict=False)
    Z = lenient.transform(X)
    assert np.all(Z[:, 2] == 0.0)  # a zero column: the factorisation reports the rank loss
    fit = nested_least_squares(Z, np.arange(6.0) ** 2, n_columns_per_capacity=[2, 3])
    assert list(fit.rank_deficient) == [False, True]
    with pytest.raises(ValueError, match="X column 1 is constant"):
        FeatureDesign.from_data(X, (0, 1), (3,), strict=True)


def test_feature_design_maps_back_like_statsmodels_on_raw_predictors() -> None:
    # Reference: statsmodels OLS on [1, x1, x0] (columns entered in the order 1, 0).
    rng = np.random.default_rng(5)
    X = rng.normal(size=(30, 2)) * [3.0, 0.01] + [100.0, -5.0]
    y = 2.0 + 0.5 * X[:, 1] - 0.1 * X[:, 0] + rng.normal(0, 0.1, 30)
    design = FeatureDesign.from_data(X, (1, 0), (2, 3))
    fit = nested_least_squares(design.transform(X), y, n_columns_per_capacity=design.n_columns)
    got = user_coefficients(design, fit.capacity(1), X, y)
    ref = sm.OLS(y, sm.add_constant(X[:, [1, 0]])).fit()
    np.testing.assert_allclose(got.coef, ref.params, rtol=1e-10)
    np.testing.assert_allclose(got.coef_sd, ref.bse, rtol=1e-10)
    assert design.labels(["a", "b"], 3) == ["intercept", "b", "a"]


def _float_power_error(degree: int, x: np.ndarray) -> float:
    """Largest error of the power-basis polynomial (exact coefficients rounded once, summed in
    float64) against the same polynomial on the Legendre basis, relative to its size."""
    basis = PolynomialBasis(degree).fit(x)
    coef = np.random.default_rng(degree).normal(size=degree + 1)
    stable = basis.transform(x) @ coef
    power = np.array([float(v) for v in basis.exact_monomials(coef).values()])
    with np.errstate(over="ignore", invalid="ignore"):
        naive = np.polynomial.polynomial.polyval(x, power)
    return float(np.max(np.abs(naive - stable)) / np.max(np.abs(stable)))


def test_power_basis_is_refused_exactly_where_float64_keeps_no_digit() -> None:
    # The claim behind user_units_problem: where the change of basis amplifies rounding beyond
    # 1 / eps, the power-basis polynomial summed in float64 has lost every digit; well below it
    # it keeps several. Checked by evaluating both forms of random polynomials at the data.
    x = np.linspace(10.0, 12.0, 60)
    for degree in range(1, 17):  # refused from degree 10 on for this x range
        design = PolynomialDesign(PolynomialBasis(degree).fit(x), (degree + 1,))
        growth = design.conversion_growth(degree + 1)
        refused = user_units_problem(design, degree + 1) is not None
        assert refused == (growth > 1 / np.finfo(float).eps)
        error = _float_power_error(degree, x)
        if refused:
            assert not error < 1e-2  # no correct digit left (or overflow)
        elif growth < 1e10:
            assert error < 1e-4
