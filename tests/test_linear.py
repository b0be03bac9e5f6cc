"""Tests for complexity.engine.linear: nested least squares from one QR.

The main outside reference is the NIST StRD linear least-squares suite (tests/data, certified
values computed by NIST in multiple precision); statsmodels OLS is the reference library.
"""

from __future__ import annotations

import hashlib
import math
import warnings

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from _nist import DATA_DIR, NAMES, digits, load, lre
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.linear_model import LinearRegression
from sklearn.model_selection import ShuffleSplit
from sklearn.pipeline import Pipeline

import complexity as cx
from complexity.basis import LegendreFeatures, PolynomialBasis
from complexity.engine import Problem
from complexity.engine import generic as generic_engine
from complexity.engine import linear as exact_engine
from complexity.engine.linear import (
    fit_linear,
    fit_polynomial,
    nested_least_squares,
    scaled_design,
    user_coefficients,
)
from complexity.plans import as_plan

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
    """The same model from nested_least_squares + user_coefficients (no refinement)."""
    case = load(name)
    if case.polynomial_degree is not None:
        basis = PolynomialBasis(case.polynomial_degree).fit(case.X)
        Z = basis.transform(case.X)
        fit = nested_least_squares(Z, case.y, n_columns_per_capacity=[Z.shape[1]])
        return user_coefficients(fit, 0, basis.monomial_matrix())
    design = scaled_design(case.X, fit_intercept=case.intercept)
    fit = nested_least_squares(design.Z, case.y, n_columns_per_capacity=[design.Z.shape[1]])
    return user_coefficients(fit, 0, design.to_user_matrix())


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
    # The plain one-QR engine (what sweeps use) already gets the SDs and residual SD.
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
    fit = nested_least_squares(design.Z, case.y, n_columns_per_capacity=list(range(1, 8)))
    for i, k in enumerate(range(0, 7)):
        ref = sm.OLS(case.y, sm.add_constant(case.X[:, :k], has_constant="add")).fit()
        assert fit.rss[i] == pytest.approx(ref.ssr, rel=1e-9)
        got = user_coefficients(fit, i, design.to_user_matrix(k + 1))
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
        np.sum(fit.residuals**2, axis=1), fit.rss, rtol=1e-8, atol=1e-20 * scale + 1e-24
    )
    assert np.max(np.abs(fit.residuals[-1])) <= 1e-8 * np.max(np.abs(y))
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
        user_coefficients(fit, 0, np.eye(2))
    with pytest.raises(ValueError, match="needs 3 coefficients but there are only 3"):
        fit_polynomial([0.0, 1.0, 2.0], [1.0, 0.0, 1.0], degree=2)


def test_saturated_capacity_has_no_noise_estimate() -> None:
    x = np.array([0.0, 1.0, 2.0])
    Z = PolynomialBasis(2).fit(x).transform(x)
    fit = nested_least_squares(Z, [1.0, 0.0, 1.0], n_columns_per_capacity=[2, 3])
    assert fit.residual_dof[1] == 0 and np.isnan(fit.sigma2[1])
    assert fit.rss[1] == 0.0
    with pytest.raises(ValueError, match="no residual degrees of freedom"):
        user_coefficients(fit, 1, np.eye(3))


def test_inputs_are_not_modified() -> None:
    Z, y = _random_problem(4)
    Z0, y0 = Z.copy(), y.copy()
    nested_least_squares(Z, y, n_columns_per_capacity=[2, 4])
    fit_polynomial(Z[:, 1], y, degree=3)
    np.testing.assert_array_equal(Z, Z0)
    np.testing.assert_array_equal(y, y0)


# ================================================================ the exact engine of sweep()


def _problem(ladder, X, y, plan, seed=0):
    root = np.random.SeedSequence(seed)
    if isinstance(plan, cx.Simulation):
        design = plan.pilot_design(root)
        problem = Problem(
            ladder, ladder.build(design), None, None, plan.x_eval, plan.target, plan, root, design
        )
        return problem, plan.resamples(0, root)
    problem = Problem(ladder, ladder.build(X), X, y, X, y, plan, root, X)
    return problem, plan.resamples(len(y), root, X, y)


def _assert_same_outcomes(a, b, rtol=1e-8) -> None:
    """Exact vs generic on the same resamples (DESIGN.md: agree to 1e-8 relative)."""
    assert len(a) == len(b)
    for oa, ob in zip(a, b):
        assert oa.index == ob.index and np.array_equal(oa.test, ob.test)
        assert oa.failures == ob.failures
        np.testing.assert_array_equal(np.isnan(oa.residuals), np.isnan(ob.residuals))
        scale = np.nanmax(np.abs(ob.residuals)) if np.isfinite(ob.residuals).any() else 1.0
        np.testing.assert_allclose(oa.residuals, ob.residuals, rtol=rtol, atol=rtol * scale)
        np.testing.assert_allclose(oa.train_mse, ob.train_mse, rtol=rtol)


def _wiggly(n, low=0.0, width=1.0, seed=0):
    rng = np.random.default_rng(seed)
    X = np.sort(rng.uniform(low, low + width, n))[:, None]
    y = np.sin(5 * (X[:, 0] - low) / width) + rng.normal(0, 0.1, n)
    return X, y


@pytest.mark.parametrize(
    "plan", [cx.Bootstrap(12), cx.CrossValidation(5, n_repeats=2)], ids=["bootstrap", "kfold"]
)
def test_exact_engine_equals_generic_polynomial(plan) -> None:
    X, y = _wiggly(40)
    problem, rs = _problem(cx.PolynomialLadder(range(0, 9)), X, y, plan)
    assert exact_engine.supports(problem)
    _assert_same_outcomes(
        list(exact_engine.run(problem, rs)), list(generic_engine.run(problem, rs))
    )


def test_exact_engine_equals_generic_far_from_zero_and_with_failures() -> None:
    # x far from zero, replicated at 7 set points: bootstrap samples often lack enough distinct x
    # for the top degrees; both engines must report the same failures (the ladder's message).
    rng = np.random.default_rng(1)
    X = np.repeat(np.linspace(1e6, 1e6 + 1, 7), 3)[:, None]
    y = np.cos(3 * (X[:, 0] - 1e6)) + rng.normal(0, 0.05, 21)
    problem, rs = _problem(cx.PolynomialLadder(range(0, 7)), X, y, cx.Bootstrap(15))
    a = list(exact_engine.run(problem, rs))
    assert any(o.failures for o in a)
    _assert_same_outcomes(a, list(generic_engine.run(problem, rs)))


def test_exact_engine_equals_generic_feature_ladder() -> None:
    rng = np.random.default_rng(2)
    X = rng.normal(size=(45, 5)) * [1, 10, 100, 1, 1e3] + [0, 5, -50, 2, 1e4]
    y = X[:, 0] - 0.2 * X[:, 2] + rng.normal(0, 0.5, 45)
    ladder = cx.FeatureLadder(range(0, 6), order=[2, 0, 4, 1, 3])
    problem, rs = _problem(ladder, X, y, cx.Bootstrap(10))
    _assert_same_outcomes(
        list(exact_engine.run(problem, rs)), list(generic_engine.run(problem, rs))
    )


def test_exact_engine_equals_generic_multi_predictor_polynomial() -> None:
    rng = np.random.default_rng(3)
    X = rng.uniform(-1, 1, (50, 2))
    y = X[:, 0] * X[:, 1] + np.sin(2 * X[:, 0]) + rng.normal(0, 0.1, 50)
    problem, rs = _problem(cx.PolynomialLadder(range(0, 4)), X, y, cx.Bootstrap(8))
    _assert_same_outcomes(
        list(exact_engine.run(problem, rs)), list(generic_engine.run(problem, rs))
    )


@pytest.mark.parametrize("fixed", [True, False], ids=["fixed-design", "sampled-x"])
def test_exact_engine_equals_generic_simulation(fixed) -> None:
    def truth(X):
        return np.sin(4 * X[:, 0])

    if fixed:
        plan = cx.Simulation(truth, 0.2, np.linspace(0, 1, 25)[:, None], n_resamples=10)
    else:
        plan = cx.Simulation(
            truth,
            0.2,
            lambda rng, n: rng.uniform(0, 1, (n, 1)),
            n_train=25,
            n_resamples=10,
            x_eval=np.linspace(0, 1, 9)[:, None],
        )
    problem, rs = _problem(cx.PolynomialLadder(range(0, 8)), None, None, plan)
    _assert_same_outcomes(
        list(exact_engine.run(problem, rs)), list(generic_engine.run(problem, rs))
    )


def test_exact_folds_equal_sklearn_cross_val_score() -> None:
    # Reference: scikit-learn cross_val_score on the sweep's own folds
    # (list(cx.CrossValidation(5).split(X, random_state=0)) gives them).
    from sklearn.model_selection import cross_val_score

    X, y = _wiggly(60, low=1e3, width=1e3)
    plan = cx.CrossValidation(5)
    folds = list(plan.split(X, random_state=0))
    ladder = cx.PolynomialLadder(range(0, 10))
    problem, rs = _problem(ladder, X, y, plan, seed=0)
    outcomes = list(exact_engine.run(problem, rs))
    domain = np.array([[X.min(), X.max()]])
    for c, d in enumerate(ladder.capacities):
        model = Pipeline(
            [
                ("legendre", LegendreFeatures(d, domain)),
                ("ls", LinearRegression(fit_intercept=False)),
            ]
        )
        ref = -cross_val_score(model, X, y, cv=folds, scoring="neg_mean_squared_error")
        ours = [float(np.mean(o.residuals[:, c] ** 2)) for o in outcomes]
        np.testing.assert_allclose(ours, ref, rtol=1e-8)


def test_results_do_not_depend_on_subset_chunking_or_n_jobs(monkeypatch) -> None:
    # Chunks hold a fixed set of resample positions, BLAS runs single-threaded: any subset of
    # resamples (a resumed checkpoint) and any n_jobs give bit-identical outcomes.
    monkeypatch.setattr(exact_engine, "_CHUNK_DOUBLES", 400)  # chunks of 10 resamples here
    X, y = _wiggly(40)
    problem, rs = _problem(cx.PolynomialLadder(range(0, 8)), X, y, cx.Bootstrap(30))
    full = list(exact_engine.run(problem, rs))
    part = list(exact_engine.run(problem, rs[3::4]))
    two = list(exact_engine.run(problem, rs, n_jobs=2))
    for o in part:
        np.testing.assert_array_equal(o.residuals, full[o.index].residuals)
        np.testing.assert_array_equal(o.train_mse, full[o.index].train_mse)
    for o, f in zip(two, full):
        np.testing.assert_array_equal(o.residuals, f.residuals)
        np.testing.assert_array_equal(o.train_mse, f.train_mse)


def test_sweep_exact_equals_generic_curves_and_gives_criteria() -> None:
    X, y = _wiggly(40, low=10.0, width=2.0)
    ladder = cx.PolynomialLadder(range(0, 8))
    kw = dict(plan=cx.Bootstrap(15), random_state=3)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        exact = cx.sweep(ladder, X, y, engine="exact", **kw)
        generic = cx.sweep(ladder, X, y, engine="generic", **kw)
        by_aic = cx.sweep(ladder, X, y, engine="exact", rule="aic", **kw)
    assert exact.metadata["engine"] == "exact"
    for col in ("train_mse", "test_mse", "variance"):
        np.testing.assert_allclose(exact.curves[col], generic.curves[col], rtol=1e-8)
    for col in ("loocv", "gcv", "aic", "aicc", "bic", "cp", "fixed_design_variance"):
        assert col in exact.curves.columns
    # the criteria of the full fit equal statsmodels on the same basis (reference library)
    Z = PolynomialBasis(7).fit(X).transform(X)
    for d in (1, 4):
        ref = sm.OLS(y, Z[:, : d + 1]).fit()
        assert exact.curves.loc[d, "aic"] == pytest.approx(ref.aic, rel=1e-10)
        assert exact.curves.loc[d, "bic"] == pytest.approx(ref.bic, rel=1e-10)
    assert by_aic.recommended == int(np.argmin(exact.curves["aic"].to_numpy()))
    coef = exact.coefficients(2)
    power = np.polynomial.polynomial.polyfit(X[:, 0], y, 2)  # numpy reference, degree 2
    np.testing.assert_allclose(coef["estimate"].to_numpy(), power, rtol=1e-8)
    assert list(coef.index) == ["1", "x", "x^2"]


def test_sweep_feature_ladder_coefficients_match_statsmodels() -> None:
    # NIST Longley through a sweep: feature counts 0..6 with an intercept.
    case = load("Longley")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        result = cx.sweep(
            cx.FeatureLadder(range(0, 7)),
            case.X,
            case.y,
            plan=cx.CrossValidation(4),
            random_state=0,
            engine="exact",
        )
    table = result.coefficients(6)
    np.testing.assert_allclose(table["estimate"].to_numpy(), case.coef, rtol=1e-10)
    np.testing.assert_allclose(table["std_error"].to_numpy(), case.coef_sd, rtol=1e-10)
    ref = sm.OLS(case.y, sm.add_constant(case.X[:, :3])).fit()
    np.testing.assert_allclose(result.coefficients(3)["estimate"], ref.params, rtol=1e-9)
    assert result.curves.loc[3, "aic"] == pytest.approx(ref.aic, rel=1e-10)


def test_collinear_predictor_is_a_failure_not_a_minimum_norm_fit() -> None:
    rng = np.random.default_rng(4)
    X = rng.normal(size=(30, 3))
    X[:, 2] = X[:, 0] - 2 * X[:, 1]
    y = X[:, 0] + rng.normal(0, 0.1, 30)
    ladder = cx.FeatureLadder(range(0, 4))
    problem, rs = _problem(ladder, X, y, cx.Bootstrap(5))
    full = exact_engine.fit_full(problem)
    assert set(full.failures) == {3} and "rank deficient" in full.failures[3]
    assert np.isnan(full.fitted[:, 3]).all() and np.isfinite(full.fitted[:, :3]).all()
    for o in exact_engine.run(problem, rs):
        assert 3 in o.failures and np.isnan(o.residuals[:, 3]).all()


@st.composite
def _sweep_data(draw):
    low = draw(st.sampled_from([1e6, 0.0]))
    width = 1.0 if low == 1e6 else 1e3
    n = draw(st.integers(14, 30))
    seed = draw(st.integers(0, 2**32 - 1))
    rng = np.random.default_rng(seed)
    X = np.sort(low + width * rng.uniform(0, 1, n))[:, None]
    y = rng.normal(0, 1, n) + np.cos(6 * (X[:, 0] - low) / width)
    return X, y


@settings(max_examples=12, deadline=None)
@given(_sweep_data())
def test_sweep_training_error_never_rises_with_degree(data) -> None:
    # Law for nested least squares (same training set, no penalty): the training error of the
    # full-data fits is non-increasing in the degree, on the exact path, for x far from zero too.
    X, y = data
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        result = cx.sweep(
            cx.PolynomialLadder(range(0, 11)),
            X,
            y,
            plan=cx.Bootstrap(3),
            random_state=0,
            engine="exact",
        )
    train = result.curves["train_mse"].to_numpy()
    assert np.all(np.diff(train) <= 1e-12 * np.mean(y**2))


def test_sweep_multi_predictor_polynomial_on_exact_path() -> None:
    rng = np.random.default_rng(5)
    X = rng.uniform([0, 100], [1, 101], size=(60, 2))
    y = X[:, 0] * (X[:, 1] - 100) + rng.normal(0, 0.05, 60)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        exact = cx.sweep(
            cx.PolynomialLadder(range(0, 4)),
            X,
            y,
            plan=cx.CrossValidation(5),
            random_state=1,
            engine="exact",
        )
        generic = cx.sweep(
            cx.PolynomialLadder(range(0, 4)),
            X,
            y,
            plan=cx.CrossValidation(5),
            random_state=1,
            engine="generic",
        )
    np.testing.assert_allclose(exact.curves["test_mse"], generic.curves["test_mse"], rtol=1e-8)
    coef = exact.coefficients(2)
    assert len(coef) == math.comb(2 + 2, 2)
    assert list(coef.index) == ["1", "x0", "x1", "x0^2", "x0*x1", "x1^2"]
    # reference: statsmodels OLS on the raw monomials (same order as PolynomialFeatures)
    from sklearn.preprocessing import PolynomialFeatures

    ref = sm.OLS(y, PolynomialFeatures(2).fit_transform(X)).fit()
    np.testing.assert_allclose(coef["estimate"], ref.params, rtol=1e-6)
    np.testing.assert_allclose(coef["std_error"], ref.bse, rtol=1e-6)


def test_ill_conditioned_training_sets_are_refit_by_qr(monkeypatch) -> None:
    # Expanding-window folds: the first training sets cover a small part of the x range, so their
    # Gram matrices are badly conditioned and the engine refits them by QR. Degrees 0-3 only,
    # where the generic path (LinearRegression truncates singular values below 1e-6 of the
    # largest) is itself accurate.
    from sklearn.model_selection import TimeSeriesSplit

    calls = []
    original = exact_engine._from_rows
    monkeypatch.setattr(exact_engine, "_from_rows", lambda *a: calls.append(1) or original(*a))
    X, y = _wiggly(60)
    plan = cx.plans.as_plan(TimeSeriesSplit(5))
    problem, rs = _problem(cx.PolynomialLadder(range(0, 4)), X, y, plan)
    a = list(exact_engine.run(problem, rs))
    assert calls  # the QR route was taken
    _assert_same_outcomes(a, list(generic_engine.run(problem, rs)))


def test_nearly_exact_fit_training_error_is_recomputed_not_cancelled() -> None:
    # y is an exact quadratic: training RSS from y'Cy - |w|^2 would be pure rounding noise
    # (about 1e-16 y'Cy); the engine recomputes it from residuals, so it is tiny, not garbage.
    X = np.linspace(0.0, 2.0, 30)[:, None]
    y = 3.0 - X[:, 0] + 0.5 * X[:, 0] ** 2
    problem, rs = _problem(cx.PolynomialLadder(range(0, 5)), X, y, cx.Bootstrap(6))
    a = list(exact_engine.run(problem, rs))
    b = list(generic_engine.run(problem, rs))
    for oa, ob in zip(a, b):
        assert np.all(oa.train_mse[2:] < 1e-28 * np.mean(y**2))
        np.testing.assert_allclose(oa.train_mse[:2], ob.train_mse[:2], rtol=1e-10)
        np.testing.assert_allclose(oa.residuals, ob.residuals, atol=1e-12)


def _assert_same_tally(a, b) -> None:
    for name in ("count", "mean", "m2", "index", "replicate", "loss", "loss2", "n_ok"):
        np.testing.assert_array_equal(getattr(a, name), getattr(b, name), err_msg=name)
    np.testing.assert_array_equal(a.train_mse, b.train_mse)
    assert a.failures == b.failures


@pytest.mark.parametrize(
    "plan",
    [
        cx.Bootstrap(30),
        cx.CrossValidation(5, n_repeats=3),
        as_plan(ShuffleSplit(12, train_size=0.5, test_size=0.3, random_state=0)),
    ],
    ids=["bootstrap", "kfold", "shuffle-split"],
)
@pytest.mark.parametrize("replicated", [False, True], ids=["distinct-x", "7-set-points"])
def test_tallies_made_in_the_engine_equal_tallies_of_its_outcomes(
    monkeypatch, plan, replicated
) -> None:
    # design decision (accumulate module notes): a block's tally is a pure function of its
    # outcomes, so the engine's direct tally (dense residuals, no per-resample outcomes) must
    # equal, bit for bit, the tally of the outcomes it yields (the checkpoint and
    # keep_predictions route). With 7 set points, high degrees fail on many resamples.
    from complexity.accumulate import tallies

    monkeypatch.setattr(exact_engine, "_CHUNK_DOUBLES", 2_000)  # several chunks of 10
    if replicated:
        X = np.repeat(np.linspace(1e3, 1e3 + 6, 7), 5)[:, None]
        y = np.sin(X[:, 0] - 1e3) + np.random.default_rng(1).normal(0, 0.1, X.shape[0])
    else:
        X, y = _wiggly(40)
    problem, rs = _problem(cx.PolynomialLadder(range(0, 8)), X, y, plan)
    size = exact_engine.block_size(problem)
    fused = list(exact_engine.run_tallies(problem, rs))
    routed = list(tallies(exact_engine.run(problem, rs), size, X.shape[0], problem.n_capacities))
    assert len(fused) == len(routed) >= 2
    for a, b in zip(fused, routed):
        _assert_same_tally(a, b)
    if replicated:
        assert any(t.failures for t in fused)


@pytest.mark.parametrize("rare_point", [False, True], ids=["distinct-x", "rare-set-point"])
def test_large_problems_tally_outcome_by_outcome_identically(rare_point) -> None:
    # above 16,384 residuals per resample the tally folds outcome by outcome (Welford) in both
    # routes; n_jobs (threads here) must not change a bit. With six set points repeated 500
    # times and a seventh measured once, about a third of the bootstrap samples miss the
    # seventh, so degree 6 and up fail on them (the failure path of the Welford fold).
    from complexity.accumulate import tallies

    if rare_point:
        X = np.append(np.repeat(np.arange(6.0), 500), 6.0)[:, None]
        y = np.cos(X[:, 0]) + np.random.default_rng(2).normal(0, 0.1, X.shape[0])
    else:
        X, y = _wiggly(3_000)
    problem, rs = _problem(cx.PolynomialLadder(range(0, 8)), X, y, cx.Bootstrap(24))
    size = exact_engine.block_size(problem)
    fused = list(exact_engine.run_tallies(problem, rs))
    two = list(exact_engine.run_tallies(problem, rs, n_jobs=2))
    routed = list(tallies(exact_engine.run(problem, rs), size, X.shape[0], problem.n_capacities))
    for a, b, c in zip(fused, routed, two):
        _assert_same_tally(a, b)
        _assert_same_tally(a, c)
    assert any(t.failures for t in fused) == rare_point


@pytest.mark.parametrize("n", [40, 3_000], ids=["dense", "streamed"])
def test_sweep_gives_identical_curves_on_every_route(tmp_path, n) -> None:
    # plain, keep_predictions, checkpointed and two-worker sweeps of the exact engine tally the
    # same blocks: the curves agree exactly (check_exact)
    X, y = _wiggly(n)
    args = (cx.PolynomialLadder(range(0, 7)), X, y)
    kw = {"plan": cx.Bootstrap(25), "random_state": 3, "engine": "exact"}
    plain = cx.sweep(*args, **kw)
    for other in (
        cx.sweep(*args, keep_predictions=True, **kw),
        cx.sweep(*args, checkpoint=tmp_path / "ck", **kw),
        cx.sweep(*args, n_jobs=2, **kw),
    ):
        pd.testing.assert_frame_equal(plain.curves, other.curves, check_exact=True)
        pd.testing.assert_series_equal(plain.stability, other.stability, check_exact=True)


def test_coefficient_tables_are_made_on_demand_and_survive_pickling() -> None:
    # design decision: tables in the user's units are built when first asked for; a result (or
    # a fitted selector holding one) must still pickle, and give the same tables afterwards
    import pickle

    X, y = _wiggly(60, low=10.0, width=2.0)
    result = cx.sweep(cx.PolynomialLadder(range(0, 6)), X, y, plan=cx.Bootstrap(5), random_state=0)
    tables = result.coefficient_tables
    assert list(tables) == [0, 1, 2, 3, 4, 5] and len(tables) == 6
    assert not tables._made  # nothing converted yet
    first = result.coefficients(3)
    again = pickle.loads(pickle.dumps(result))
    pd.testing.assert_frame_equal(again.coefficients(3), first, check_exact=True)
    pd.testing.assert_frame_equal(again.coefficients(5), result.coefficients(5), check_exact=True)
    with pytest.raises(ValueError, match="capacity must be one of"):
        result.coefficients(9)
