"""Tests for complexity.basis: graded Legendre bases and the way back to power coefficients."""

from __future__ import annotations

import math

import numpy as np
import pytest
from _nist import load as load_nist
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.polynomial import Legendre, Polynomial
from sklearn.base import clone
from sklearn.linear_model import LinearRegression
from sklearn.pipeline import Pipeline
from sklearn.preprocessing import PolynomialFeatures
from sklearn.utils.estimator_checks import parametrize_with_checks

from complexity.basis import (
    LegendreFeatures,
    PolynomialBasis,
    n_total_degree_terms,
    total_degree_terms,
)

# ---------------------------------------------------------------- terms and column counts


@settings(max_examples=40, deadline=None)
@given(p=st.integers(1, 4), d=st.integers(0, 5))
def test_terms_match_sklearn_polynomial_features_order(p: int, d: int) -> None:
    # Reference: scikit-learn PolynomialFeatures.powers_ lists the same monomials in the same
    # graded order; the count is the binomial C(p + d, d), the number of monomials of total
    # degree <= d.
    ref = PolynomialFeatures(degree=d).fit(np.zeros((1, p))).powers_
    terms = total_degree_terms(p, d)
    assert [tuple(int(v) for v in row) for row in ref] == terms
    assert len(terms) == n_total_degree_terms(p, d) == math.comb(p + d, d)


def test_columns_are_nested_by_total_degree() -> None:
    rng = np.random.default_rng(1)
    X = rng.random((30, 3))
    big = PolynomialBasis(4).fit(X)
    for d in range(5):
        small = PolynomialBasis(d, domain=big.domain_).fit(X)
        k = big.n_columns(d)
        assert k == math.comb(3 + d, d)
        assert small.terms_ == big.terms_[:k]
        np.testing.assert_array_equal(small.transform(X), big.transform(X)[:, :k])
        assert all(sum(t) <= d for t in big.terms_[:k])


def test_one_predictor_columns_equal_numpy_legendre_on_the_same_domain() -> None:
    # Reference: numpy.polynomial.Legendre with domain [a, b] maps x onto [-1, 1] the same way
    # (METHODS.md section 9) and evaluates P_k there.
    x = np.linspace(3.0, 11.0, 17)
    basis = PolynomialBasis(6).fit(x)
    V = basis.transform(x)
    for k in range(7):
        ref = Legendre.basis(k, domain=[3.0, 11.0])(x)
        np.testing.assert_allclose(V[:, k], ref, rtol=1e-13, atol=1e-13)


def test_several_predictors_columns_are_products() -> None:
    rng = np.random.default_rng(2)
    X = rng.uniform(-5, 5, size=(12, 2))
    basis = PolynomialBasis(3).fit(X)
    V = basis.transform(X)
    for c, (e0, e1) in enumerate(basis.terms_):
        ref = Legendre.basis(e0, domain=basis.domain_[0])(X[:, 0]) * Legendre.basis(
            e1, domain=basis.domain_[1]
        )(X[:, 1])
        np.testing.assert_allclose(V[:, c], ref, rtol=1e-12, atol=1e-12)


def test_multi_predictor_fit_equals_lstsq_on_raw_monomials() -> None:
    # Well-conditioned small case: both designs span the total-degree-2 polynomials in 3
    # variables, so the least-squares fitted values must agree (common practice: same span ->
    # same projection).
    rng = np.random.default_rng(3)
    X = rng.uniform(-1, 2, size=(60, 3))
    y = np.sin(X[:, 0]) + X[:, 1] * X[:, 2] + rng.normal(0, 0.1, 60)
    basis = PolynomialBasis(2).fit(X)
    Z = basis.transform(X)
    assert Z.shape == (60, math.comb(3 + 2, 2))
    raw = PolynomialFeatures(2).fit_transform(X)
    fit_ours = Z @ np.linalg.lstsq(Z, y, rcond=None)[0]
    fit_raw = raw @ np.linalg.lstsq(raw, y, rcond=None)[0]
    np.testing.assert_allclose(fit_ours, fit_raw, rtol=1e-10, atol=1e-10)


# ---------------------------------------------------------------- back to the user's units


def test_power_coefficients_match_numpy_convert() -> None:
    # Reference: numpy Polynomial.fit(...).convert() gives power coefficients in the original x.
    rng = np.random.default_rng(4)
    x = np.sort(rng.uniform(2.0, 7.0, 25))
    y = np.exp(x / 3) + rng.normal(0, 0.01, 25)
    basis = PolynomialBasis(4).fit(x)
    c = np.linalg.lstsq(basis.transform(x), y, rcond=None)[0]
    ref = Polynomial.fit(x, y, 4).convert().coef
    np.testing.assert_allclose(basis.power_coefficients(c), ref, rtol=1e-9)


def test_power_coefficients_of_a_leading_block() -> None:
    x = np.linspace(-3.0, 5.0, 9)
    basis = PolynomialBasis(5).fit(x)
    y = 2.0 - 0.5 * x + 0.25 * x**2
    Z = basis.transform(x)[:, :3]
    c = np.linalg.lstsq(Z, y, rcond=None)[0]
    np.testing.assert_allclose(basis.power_coefficients(c), [2.0, -0.5, 0.25], atol=1e-13)
    M = basis.monomial_matrix(3)
    np.testing.assert_allclose(M @ c, [2.0, -0.5, 0.25], atol=1e-13)


def test_monomial_coefficients_recover_a_known_polynomial_in_two_variables() -> None:
    rng = np.random.default_rng(5)
    X = rng.uniform([100.0, -2.0], [101.0, 3.0], size=(40, 2))
    # y = 1 + 2 u + 3 v - u v + 0.5 v^2 with u = x0 - 100 (so, in x0: shifted coefficients)
    u, v = X[:, 0] - 100.0, X[:, 1]
    y = 1 + 2 * u + 3 * v - u * v + 0.5 * v**2
    basis = PolynomialBasis(2).fit(X)
    c = np.linalg.lstsq(basis.transform(X), y, rcond=None)[0]
    mono = basis.monomial_coefficients(c)
    expected = {  # expand in x0 = u + 100 by hand
        (0, 0): 1 - 200.0,
        (1, 0): 2.0,
        (0, 1): 3 + 100.0,
        (2, 0): 0.0,
        (1, 1): -1.0,
        (0, 2): 0.5,
    }
    assert set(mono) == set(expected)
    for key, val in expected.items():
        assert mono[key] == pytest.approx(val, abs=1e-8)


def test_exact_monomials_add_parts_before_rounding() -> None:
    basis = PolynomialBasis(1, domain=(0.0, 3.0)).fit([0.0, 3.0])
    tiny = 1e-30
    mono = basis.exact_monomials([1.0, 0.0], [tiny, 0.0])
    # the constant is 1 + 1e-30 exactly (a float sum would round it to 1)
    assert mono[(0,)] - 1 > 0


# ---------------------------------------------------------------- scikit-learn transformer


def test_legendre_pipeline_reproduces_nist_filip_residual_sd() -> None:
    # Source: NIST StRD Filip (tests/data/Filip.dat), degree 10, certified residual SD.
    case = load_nist("Filip")
    x = case.X
    domain = np.array([[x.min(), x.max()]])
    model = Pipeline(
        [("legendre", LegendreFeatures(10, domain)), ("ls", LinearRegression(fit_intercept=False))]
    ).fit(x, case.y)
    rss = float(np.sum((case.y - model.predict(x)) ** 2))
    resid_sd = math.sqrt(rss / (len(case.y) - 11))
    assert resid_sd == pytest.approx(case.residual_sd, rel=1e-10)


def test_legendre_features_params_and_clone() -> None:
    est = LegendreFeatures(degree=3, domain=(0.0, 1.0))
    assert est.get_params() == {"degree": 3, "domain": (0.0, 1.0)}
    twin = clone(est)
    assert twin.get_params() == est.get_params()


def test_legendre_features_fixed_domain_is_the_same_for_every_subset() -> None:
    x = np.linspace(0.0, 10.0, 21)[:, None]
    est = LegendreFeatures(2, domain=(0.0, 10.0))
    full = est.fit(x).transform(x[:5])
    sub = clone(est).fit(x[:5]).transform(x[:5])  # a "resample" with a smaller x range
    np.testing.assert_array_equal(full, sub)


def test_feature_names() -> None:
    est = LegendreFeatures(2).fit(np.random.default_rng(0).random((5, 2)))
    names = est.get_feature_names_out(["t", "p"]).tolist()
    assert names == ["1", "P1(t)", "P1(p)", "P2(t)", "P1(t)*P1(p)", "P2(p)"]


@parametrize_with_checks([LegendreFeatures(degree=2)])
def test_sklearn_estimator_contract(estimator, check) -> None:
    # Reference: scikit-learn's own estimator checks.
    check(estimator)


# ---------------------------------------------------------------- bad input


def test_degenerate_data_domain_names_the_column() -> None:
    X = np.column_stack([np.arange(4.0), np.full(4, 2.5)])
    with pytest.raises(ValueError, match=r"column 1 is constant.*degenerate"):
        PolynomialBasis(2).fit(X)


@pytest.mark.parametrize(
    ("domain", "pattern"),
    [
        ((1.0, 1.0), "degenerate or reversed"),
        ((2.0, 1.0), "degenerate or reversed"),
        ((0.0, np.inf), "must be finite"),
        ([[0.0, 1.0], [0.0, 1.0]], "2 interval"),
        ((0.0, 1.0, 2.0), "shape"),
    ],
)
def test_bad_domain(domain, pattern) -> None:
    with pytest.raises(ValueError, match=pattern):
        PolynomialBasis(1, domain=domain).fit(np.arange(3.0))


def test_domain_of_wrong_kind() -> None:
    with pytest.raises(TypeError, match="domain must be"):
        PolynomialBasis(1, domain="wide").fit(np.arange(3.0))


@pytest.mark.parametrize(("degree", "exc"), [(-1, ValueError), (1.5, TypeError), (True, TypeError)])
def test_bad_degree(degree, exc) -> None:
    with pytest.raises(exc, match="degree must be a whole number >= 0"):
        PolynomialBasis(degree)


def test_bad_arrays() -> None:
    with pytest.raises(ValueError, match="NaN or infinite"):
        PolynomialBasis(1).fit([0.0, np.nan, 1.0])
    with pytest.raises(TypeError, match="real numbers"):
        PolynomialBasis(1).fit(np.array(["a", "b"]))
    basis = PolynomialBasis(1).fit(np.random.default_rng(0).random((4, 2)))
    with pytest.raises(ValueError, match="fitted on 2"):
        basis.transform(np.zeros((3, 3)))
    with pytest.raises(ValueError, match="<= the basis degree"):
        basis.n_columns(2)
    with pytest.raises(ValueError, match="one predictor"):
        basis.power_coefficients(np.zeros(3))
    with pytest.raises(ValueError, match="between 1 and 3"):
        basis.monomial_coefficients(np.zeros(4))
    with pytest.raises(RuntimeError, match="not fitted"):
        PolynomialBasis(1).transform([1.0])


def test_inputs_are_not_modified() -> None:
    X = np.array([[3.0, 1.0], [5.0, 2.0], [4.0, 7.0]])
    keep = X.copy()
    basis = PolynomialBasis(2).fit(X)
    basis.transform(X)
    c = np.ones(6)
    basis.monomial_coefficients(c)
    np.testing.assert_array_equal(X, keep)
    np.testing.assert_array_equal(c, np.ones(6))
