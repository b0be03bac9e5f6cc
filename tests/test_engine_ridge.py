"""Tests for complexity.engine.ridge: every penalty of a ridge ladder from one SVD per resample.

References: scikit-learn's ``Ridge`` refitted on every training set (reference library), its
``RidgeCV(alphas=..., store_cv_results=True)`` efficient leave-one-out errors (reference
library), and the generic engine of this package on the same resamples. Data: scikit-learn's
diabetes data (an open data set the package ships, Efron et al. 2004).
"""

from __future__ import annotations

import inspect
import warnings

import numpy as np
import pytest
from sklearn.datasets import load_diabetes
from sklearn.linear_model import Lasso, Ridge, RidgeCV
from sklearn.pipeline import Pipeline, make_pipeline
from sklearn.preprocessing import MinMaxScaler, StandardScaler

import complexity as cx
from complexity.engine import Problem
from complexity.engine import generic as generic_engine
from complexity.engine import ridge as ridge_engine

ALPHAS = np.logspace(-4, 3, 12)


@pytest.fixture(scope="module")
def diabetes() -> tuple[np.ndarray, np.ndarray]:
    X, y = load_diabetes(return_X_y=True)
    return X, y


def _problem(ladder, X, y, plan, seed=0, w=None):
    root = np.random.SeedSequence(seed)
    problem = Problem(ladder, ladder.build(X), X, y, X, y, plan, root, X, sample_weight=w)
    return problem, plan.resamples(len(y), root, X, y)


def _rel(a: np.ndarray, b: np.ndarray) -> float:
    return float(np.max(np.abs(a - b)) / np.max(np.abs(b)))


# ---------------------------------------------------------------- against scikit-learn Ridge


@pytest.mark.parametrize("plan", [cx.Bootstrap(4), cx.CrossValidation(5)])
@pytest.mark.parametrize("scaled", [False, True])
def test_predictions_equal_sklearn_ridge_for_every_alpha(diabetes, plan, scaled) -> None:
    # reference library: scikit-learn Ridge(alpha).fit on the resample's training rows
    X, y = diabetes
    est = make_pipeline(StandardScaler(), Ridge()) if scaled else Ridge()
    param = "ridge__alpha" if scaled else "alpha"
    ladder = cx.ParamLadder(est, param, list(ALPHAS))
    problem, resamples = _problem(ladder, X, y, plan)
    assert ridge_engine.supports(problem)
    for r, out in zip(resamples, ridge_engine.run(problem, resamples)):
        for c, model in enumerate(problem.models):
            ref = model.fit(X[r.train], y[r.train])
            pred = ref.predict(X[r.test])
            assert _rel(out.residuals[:, c] + y[r.test], pred) < 1e-10
            train = np.mean((ref.predict(X[r.train]) - y[r.train]) ** 2)
            assert abs(out.train_mse[c] - train) <= 1e-10 * train


def test_full_fit_equals_sklearn_ridge(diabetes) -> None:
    # reference library: scikit-learn Ridge(alpha).fit on all the data
    X, y = diabetes
    ladder = cx.ParamLadder(Ridge(), "alpha", list(ALPHAS))
    problem, _ = _problem(ladder, X, y, cx.Bootstrap(2))
    full = ridge_engine.fit_full(problem)
    for c, a in enumerate(ALPHAS):
        pred = Ridge(alpha=a).fit(X, y).predict(X)
        assert _rel(full.fitted[:, c], pred) < 1e-10
        assert full.train_mse[c] == pytest.approx(np.mean((pred - y) ** 2), rel=1e-10)


def _ridgecv_loo(X: np.ndarray, y: np.ndarray, alphas: np.ndarray) -> np.ndarray:
    """scikit-learn RidgeCV's efficient leave-one-out mean squared error per alpha."""
    keyword = (
        "store_cv_results"
        if "store_cv_results" in inspect.signature(RidgeCV).parameters
        else "store_cv_values"
    )
    cv = RidgeCV(alphas=alphas, **{keyword: True}).fit(X, y)
    values = getattr(cv, "cv_results_", None)
    if values is None:
        values = cv.cv_values_
    return np.asarray(values).mean(axis=0)


def test_closed_form_loo_equals_ridgecv(diabetes) -> None:
    # reference library: scikit-learn RidgeCV(alphas, store_cv_results=True), leave-one-out
    X, y = diabetes
    ladder = cx.ParamLadder(Ridge(), "alpha", list(ALPHAS))
    problem, _ = _problem(ladder, X, y, cx.Bootstrap(2))
    full = ridge_engine.fit_full(problem)
    ref = _ridgecv_loo(X, y, ALPHAS)
    np.testing.assert_allclose(full.criteria["loocv"].to_numpy(), ref, rtol=1e-8)
    assert full.criteria["loocv_defined"].all()


def test_closed_form_loo_equals_refitting_without_each_row() -> None:
    # PRESS is exact for a quadratic penalty (Allen 1974): checked by n refits of sklearn Ridge
    rng = np.random.default_rng(4)
    X = rng.normal(size=(25, 4))
    y = X @ [1.0, 0.0, -2.0, 0.5] + rng.normal(size=25)
    alphas = [0.01, 1.0, 30.0]
    ladder = cx.ParamLadder(Ridge(), "alpha", alphas)
    problem, _ = _problem(ladder, X, y, cx.Bootstrap(2))
    full = ridge_engine.fit_full(problem)
    for c, a in enumerate(alphas):
        errors = [
            (
                Ridge(alpha=a).fit(np.delete(X, i, 0), np.delete(y, i)).predict(X[i : i + 1])[0]
                - y[i]
            )
            ** 2
            for i in range(25)
        ]
        assert full.criteria["loocv"].iloc[c] == pytest.approx(np.mean(errors), rel=1e-10)


def test_gcv_uses_the_effective_number_of_parameters(diabetes) -> None:
    # Golub, Heath & Wahba (1979): GCV = n RSS / (n - tr H)^2, tr H = sum of the leverages
    X, y = diabetes
    ladder = cx.ParamLadder(Ridge(), "alpha", list(ALPHAS))
    problem, _ = _problem(ladder, X, y, cx.Bootstrap(2))
    full = ridge_engine.fit_full(problem)
    n = y.size
    trace = full.leverage.sum(axis=1)
    expected = n * (n * full.train_mse) / (n - trace) ** 2
    np.testing.assert_allclose(full.criteria["gcv"].to_numpy(), expected, rtol=1e-12)
    # the leverages: 1/n + diagonal of the centred ridge hat matrix, formed directly
    Xc = X - X.mean(axis=0)
    a = ALPHAS[3]
    H = Xc @ np.linalg.solve(Xc.T @ Xc + a * np.eye(X.shape[1]), Xc.T) + 1.0 / n
    np.testing.assert_allclose(full.leverage[3], np.diag(H), rtol=1e-10)


# ---------------------------------------------------------------- the whole sweep


@pytest.mark.parametrize(
    "plan", [cx.Bootstrap(20), cx.CrossValidation(5, n_repeats=3)], ids=["bootstrap", "kfold"]
)
def test_sweep_curves_equal_the_generic_engine(diabetes, plan) -> None:
    # reference: this package's generic engine (one scikit-learn Ridge fit per resample and alpha)
    X, y = diabetes
    ladder = cx.ParamLadder(Ridge(), "alpha", list(ALPHAS))
    kw = {"plan": plan, "random_state": 7, "noise": 2900.0}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        ours = cx.sweep(ladder, X, y, **kw)
        other = cx.sweep(ladder, X, y, engine="generic", **kw)
        forced = cx.sweep(ladder, X, y, engine="exact", **kw)
    assert ours.metadata["engine"] == "exact-ridge" == forced.metadata["engine"]
    assert other.metadata["engine"] == "generic"
    a, b = ours.curves, other.curves
    assert {"loocv", "gcv"} <= set(a.columns)
    for col in b.columns:
        if b[col].dtype.kind != "f":
            assert (a[col] == b[col]).all(), col
            continue
        x, z = a[col].to_numpy(), b[col].to_numpy()
        np.testing.assert_array_equal(np.isnan(x), np.isnan(z), err_msg=col)
        ok = np.isfinite(z)
        scale = max(np.max(np.abs(z[ok])), 1e-300) if ok.any() else 1.0
        assert np.max(np.abs(x[ok] - z[ok]), initial=0.0) <= 1e-9 * scale, col
    assert ours.recommended == other.recommended


def test_sweep_results_do_not_depend_on_n_jobs(diabetes) -> None:
    X, y = diabetes
    ladder = cx.ParamLadder(Ridge(), "alpha", list(ALPHAS))
    kw = {"plan": cx.Bootstrap(12), "random_state": 1, "noise": 2900.0}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        one = cx.sweep(ladder, X, y, n_jobs=1, **kw)
        two = cx.sweep(ladder, X, y, n_jobs=2, **kw)
    assert one.metadata["engine"] == "exact-ridge"
    assert one.curves.equals(two.curves)
    problem, resamples = _problem(ladder, X, y, cx.Bootstrap(12))
    a = list(ridge_engine.run_tallies(problem, resamples, n_jobs=1))
    b = list(ridge_engine.run_tallies(problem, resamples, n_jobs=2))
    for ta, tb in zip(a, b, strict=True):
        assert np.array_equal(ta.mean, tb.mean) and np.array_equal(ta.m2, tb.m2)


def test_tallies_equal_the_tallies_of_run(diabetes) -> None:
    from complexity.accumulate import tallies

    X, y = diabetes
    ladder = cx.ParamLadder(Ridge(), "alpha", list(ALPHAS))
    problem, resamples = _problem(ladder, X, y, cx.CrossValidation(5, n_repeats=2))
    size = ridge_engine.block_size(problem)
    direct = list(ridge_engine.run_tallies(problem, resamples))
    again = list(tallies(ridge_engine.run(problem, resamples), size, y.size, len(ALPHAS)))
    for ta, tb in zip(direct, again, strict=True):
        assert np.array_equal(ta.mean, tb.mean) and np.array_equal(ta.loss, tb.loss)


def test_simulation_outcomes_equal_generic() -> None:
    # reference: the generic engine on the same simulated training sets
    truth = lambda x: np.sin(3 * x[:, 0])  # noqa: E731
    sampler = lambda rng, n: rng.uniform(0, 1, (n, 1))  # noqa: E731
    plan = cx.Simulation(truth, 0.2, sampler, n_train=40, n_resamples=4, x_eval=np.c_[0:1:9j])
    ladder = cx.ParamLadder(make_pipeline(StandardScaler(), Ridge()), "ridge__alpha", [0.1, 3.0])
    root = np.random.SeedSequence(0)
    design = plan.pilot_design(root)
    problem = Problem(
        ladder, ladder.build(design), None, None, plan.x_eval, plan.target, plan, root, design
    )
    assert ridge_engine.supports(problem)
    resamples = plan.resamples(0, root)
    ours = list(ridge_engine.run(problem, resamples))
    ref = list(generic_engine.run(problem, resamples))
    for a, b in zip(ours, ref, strict=True):
        np.testing.assert_allclose(a.residuals, b.residuals, rtol=1e-10, atol=1e-12)
        np.testing.assert_allclose(a.train_mse, b.train_mse, rtol=1e-10)


def test_input_arrays_are_not_modified(diabetes) -> None:
    X, y = diabetes
    X0, y0 = X.copy(), y.copy()
    ladder = cx.ParamLadder(make_pipeline(StandardScaler(), Ridge()), "ridge__alpha", [0.1, 1.0])
    problem, resamples = _problem(ladder, X, y, cx.Bootstrap(3))
    list(ridge_engine.run(problem, resamples))
    ridge_engine.fit_full(problem)
    assert np.array_equal(X, X0) and np.array_equal(y, y0)


# ---------------------------------------------------------------- what it refuses


@pytest.mark.parametrize(
    "estimator, param, values",
    [
        (Ridge(fit_intercept=False), "alpha", [0.1, 1.0]),
        (Ridge(positive=True), "alpha", [0.1, 1.0]),
        (Ridge(), "alpha", [0.0, 1.0]),
        (Lasso(), "alpha", [0.1, 1.0]),
        (make_pipeline(MinMaxScaler(), Ridge()), "ridge__alpha", [0.1, 1.0]),
        (make_pipeline(StandardScaler(), StandardScaler(), Ridge()), "ridge__alpha", [0.1]),
        (Pipeline([("r", Ridge())]), "r__fit_intercept", [True, False]),
        (make_pipeline(StandardScaler(copy=False), Ridge()), "ridge__alpha", [0.1]),
    ],
    ids=["no-intercept", "positive", "alpha-0", "lasso", "minmax", "two-scalers", "mixed", "copy"],
)
def test_unsupported_ladders_fall_back_to_generic(diabetes, estimator, param, values) -> None:
    X, y = diabetes
    ladder = cx.ParamLadder(estimator, param, values)
    problem, _ = _problem(ladder, X, y, cx.Bootstrap(2))
    assert not ridge_engine.supports(problem)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = cx.sweep(ladder, X, y, plan=cx.Bootstrap(3), random_state=0, noise=2900.0)
    assert result.metadata["engine"] == "generic"
    with pytest.raises(ValueError, match="engine='exact' needs"):
        cx.sweep(ladder, X, y, plan=cx.Bootstrap(3), engine="exact", noise=2900.0)


def test_sample_weight_falls_back_to_generic(diabetes) -> None:
    X, y = diabetes
    w = np.linspace(0.5, 1.5, y.size)
    ladder = cx.ParamLadder(Ridge(), "alpha", [0.1, 1.0])
    problem, _ = _problem(ladder, X, y, cx.Bootstrap(2), w=w)
    assert not ridge_engine.supports(problem)
    with pytest.raises(ValueError, match="ridge engine cannot serve"):
        ridge_engine.fit_full(problem)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        result = cx.sweep(
            ladder, X, y, plan=cx.Bootstrap(3), sample_weight=w, random_state=0, noise=2900.0
        )
    assert result.metadata["engine"] == "generic"


def test_loocv_rule_picks_the_ridgecv_alpha(diabetes) -> None:
    # reference library: RidgeCV's chosen alpha is the argmin of its leave-one-out errors
    X, y = diabetes
    ladder = cx.ParamLadder(Ridge(), "alpha", list(ALPHAS))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        result = cx.sweep(
            ladder, X, y, plan=cx.CrossValidation(5), rule="loocv", random_state=0, noise=2900.0
        )
    assert result.recommended == RidgeCV(alphas=ALPHAS).fit(X, y).alpha_
