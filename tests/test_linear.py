"""Tests for complexity.engine.linear: the exact engine of sweep(), every resample batched.

References: the generic engine on the same resamples (DESIGN.md: agree to 1e-8 relative where
the generic path is itself accurate), statsmodels OLS, numpy's polyfit, and NIST StRD (tests/data)
for the coefficients a sweep hands out.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from _nist import load
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.linear_model import LinearRegression
from sklearn.model_selection import ShuffleSplit
from sklearn.pipeline import Pipeline

import complexity as cx
from complexity.basis import LegendreFeatures, PolynomialBasis
from complexity.engine import Problem
from complexity.engine import _batched as exact_batched
from complexity.engine import generic as generic_engine
from complexity.engine import linear as exact_engine
from complexity.plans import as_plan

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
    monkeypatch.setattr(exact_batched, "CHUNK_DOUBLES", 400)  # chunks of 10 resamples here
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
    original = exact_engine.from_rows
    monkeypatch.setattr(exact_engine, "from_rows", lambda *a: calls.append(1) or original(*a))
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

    monkeypatch.setattr(exact_batched, "CHUNK_DOUBLES", 2_000)  # several chunks of 10
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
