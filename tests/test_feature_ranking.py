"""FeatureLadder: fixed and ranked predictor orders, ranking inside every training set.

Outside references: scikit-learn's ``cross_val_score`` on the same folds, ``SelectKBest`` with
``f_regression`` and ``SequentialFeatureSelector`` (scikit-learn's own feature selection), Pearson
correlations from ``r_regression``, and statsmodels OLS for the partial F test. Data:
``sklearn.datasets.load_diabetes`` (an open data set shipped with scikit-learn).
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.datasets import load_diabetes
from sklearn.dummy import DummyRegressor
from sklearn.feature_selection import (
    SelectKBest,
    SequentialFeatureSelector,
    f_regression,
    r_regression,
)
from sklearn.linear_model import LinearRegression
from sklearn.model_selection import KFold, cross_val_score
from sklearn.pipeline import make_pipeline

import complexity as cx
from complexity._ranking import _rank_correlation, _rank_forward_f

pytestmark = pytest.mark.filterwarnings("ignore::complexity.CapacityWarning")


@pytest.fixture(scope="module")
def diabetes():
    X, y = load_diabetes(return_X_y=True)
    return X, y


def _pooled_cv_mse(estimator, X, y, folds):
    """cross_val_score's per-fold MSE, pooled over folds weighted by fold size."""
    scores = cross_val_score(estimator, X, y, cv=folds, scoring="neg_mean_squared_error")
    sizes = np.array([len(test) for _, test in folds], dtype=float)
    return float(np.sum(-scores * sizes) / sizes.sum())


# ------------------------------------------------------------------ fixed order vs scikit-learn


@pytest.mark.parametrize("engine", ["generic", "auto"])
def test_fixed_order_test_error_equals_cross_val_score_on_diabetes(diabetes, engine):
    # Reference: sklearn cross_val_score of LinearRegression on the first k columns, same folds.
    # The sweep pools squared errors over all held-out rows, i.e. the fold MSEs weighted by size.
    X, y = diabetes
    plan = cx.CrossValidation(10)
    folds = list(plan.split(X, random_state=7))
    result = cx.sweep(
        cx.FeatureLadder(range(0, 11)), X, y, plan=plan, random_state=7, engine=engine
    )
    for k in range(0, 11):
        model = DummyRegressor() if k == 0 else LinearRegression()
        ref = _pooled_cv_mse(model, X[:, : max(k, 1)], y, folds)
        assert result.curves.loc[k, "test_mse"] == pytest.approx(ref, rel=1e-10)


def test_sklearn_kfold_as_plan_matches_cross_val_score(diabetes):
    # Reference: the same KFold object handed to cross_val_score.
    X, y = diabetes
    kfold = KFold(5, shuffle=True, random_state=11)
    folds = list(kfold.split(X))
    result = cx.sweep(cx.FeatureLadder([2, 5, 8]), X, y, plan=kfold, random_state=0)
    for k in (2, 5, 8):
        ref = _pooled_cv_mse(LinearRegression(), X[:, :k], y, folds)
        assert result.curves.loc[k, "test_mse"] == pytest.approx(ref, rel=1e-10)


# ------------------------------------------------------------------ the rankings themselves


def test_correlation_ranking_matches_r_regression(diabetes):
    # Reference: sklearn.feature_selection.r_regression (Pearson r of each column with y).
    X, y = diabetes
    expected = np.argsort(-np.abs(r_regression(X, y)), kind="stable")
    assert _rank_correlation(X, y).tolist() == expected.tolist()
    ladder = cx.FeatureLadder([3], order="correlation")
    fitted = ladder.build(X)[0].fit(X, y)
    assert fitted.named_steps["columns"].columns_.tolist() == expected[:3].tolist()


def test_forward_f_ranking_matches_statsmodels_partial_f(diabetes):
    # Reference: statsmodels OLS; at each step the entering column has the largest partial F
    # (compare_f_test of the model with the candidate against the model without it).
    sm = pytest.importorskip("statsmodels.api")
    X, y = diabetes
    ours = _rank_forward_f(X, y, 5)[:5].tolist()
    chosen: list[int] = []
    for _ in range(5):
        base = sm.OLS(y, sm.add_constant(X[:, chosen]) if chosen else np.ones((len(y), 1))).fit()
        best, best_f = None, -np.inf
        for j in range(X.shape[1]):
            if j in chosen:
                continue
            fuller = sm.OLS(y, sm.add_constant(X[:, [*chosen, j]])).fit()
            f_value = fuller.compare_f_test(base)[0]
            if f_value > best_f:
                best, best_f = j, f_value
        chosen.append(best)
    assert ours == chosen


def test_forward_f_first_step_is_the_best_correlation(diabetes):
    # Law: with one predictor, the partial F is the univariate F = r^2 / (1 - r^2) (n - 2),
    # increasing in |r| (f_regression's docstring states this relation).
    X, y = diabetes
    assert _rank_forward_f(X, y, 1)[0] == _rank_correlation(X, y)[0]


@settings(max_examples=30, deadline=None)
@given(
    seed=st.integers(0, 2**32 - 1),
    n=st.integers(8, 30),
    p=st.integers(2, 7),
)
def test_forward_f_each_step_minimises_the_residual_sum_of_squares(seed, n, p):
    # Law: the column that enters minimises the RSS of least squares (with an intercept) on the
    # columns already chosen plus that column; numpy.linalg.lstsq is the reference fit.
    rng = np.random.default_rng(seed)
    X = rng.standard_normal((n, p))
    y = rng.standard_normal(n) + X[:, 0]
    steps = min(p, n - 2)
    order = _rank_forward_f(X, y, steps)
    assert sorted(order.tolist()) == list(range(p))

    def rss(cols):
        A = np.column_stack([np.ones(n), X[:, cols]])
        coef = np.linalg.lstsq(A, y, rcond=None)[0]
        return float(np.sum((y - A @ coef) ** 2))

    for s in range(steps):
        done = order[:s].tolist()
        picked = rss([*done, int(order[s])])
        for j in set(range(p)) - set(done):
            assert picked <= rss([*done, j]) * (1 + 1e-9) + 1e-12


def test_constant_column_ranks_last():
    rng = np.random.default_rng(0)
    X = rng.standard_normal((30, 4))
    X[:, 1] = 3.0
    y = X[:, 1] + X[:, 2] + 0.1 * rng.standard_normal(30)
    assert _rank_correlation(X, y)[-1] == 1
    assert _rank_forward_f(X, y, 4)[-1] == 1


# ------------------------------------------------------------------ ranked ladders in a sweep


def test_correlation_ladder_equals_selectkbest_pipeline_on_diabetes(diabetes):
    # Reference: sklearn Pipeline(SelectKBest(f_regression, k), LinearRegression()) inside
    # cross_val_score, which also selects inside every training fold. f_regression's F is an
    # increasing function of |r|, so both keep the same k columns.
    X, y = diabetes
    plan = cx.CrossValidation(10)
    folds = list(plan.split(X, random_state=3))
    result = cx.sweep(
        cx.FeatureLadder([1, 2, 4, 7], order="correlation"), X, y, plan=plan, random_state=3
    )
    # ranked least-squares ladders now run on the ranked exact engine (engine/ranked.py)
    assert result.metadata["engine"] == "exact-ranked"
    for k in (1, 2, 4, 7):
        ref = _pooled_cv_mse(
            make_pipeline(SelectKBest(f_regression, k=k), LinearRegression()), X, y, folds
        )
        assert result.curves.loc[k, "test_mse"] == pytest.approx(ref, rel=1e-10)


class _InSample:
    """A 'split' whose training and test rows are all rows: scores a model on its own data."""

    def split(self, X, y=None, groups=None):
        rows = np.arange(len(X))
        yield rows, rows

    def get_n_splits(self, X=None, y=None, groups=None):
        return 1


def test_f_test_ladder_equals_sequential_feature_selector(diabetes):
    # Reference: sklearn SequentialFeatureSelector, forward, scored by the in-sample MSE of
    # LinearRegression: each step adds the column that lowers the RSS most, which is the column
    # with the largest partial F. Run inside cross_val_score on the sweep's own folds.
    X, y = diabetes
    plan = cx.CrossValidation(5)
    folds = list(plan.split(X, random_state=5))
    result = cx.sweep(cx.FeatureLadder([1, 3], order="f-test"), X, y, plan=plan, random_state=5)
    sfs = SequentialFeatureSelector(
        LinearRegression(),
        n_features_to_select=3,
        direction="forward",
        scoring="neg_mean_squared_error",
        cv=_InSample(),
    )
    ref = _pooled_cv_mse(make_pipeline(sfs, LinearRegression()), X, y, folds)
    assert result.curves.loc[3, "test_mse"] == pytest.approx(ref, rel=1e-10)


def test_callable_order_sees_only_training_rows():
    # Ambroise & McLachlan (2002): the ranking must be redone on each training set only.
    rng = np.random.default_rng(1)
    n = 40
    ids = np.arange(n, dtype=float)
    X = np.column_stack([ids, rng.standard_normal((n, 5))])
    y = rng.standard_normal(n)
    seen: list[frozenset] = []

    def rank(X_train, y_train):
        seen.append(frozenset(X_train[:, 0].tolist()))
        return np.argsort(-np.abs(X_train.T @ (y_train - y_train.mean())), kind="stable")

    plan = cx.CrossValidation(5)
    result = cx.sweep(cx.FeatureLadder([1, 2], order=rank), X, y, plan=plan, random_state=2)
    training_sets = {frozenset(ids[train].tolist()) for train, _ in plan.split(X, random_state=2)}
    everything = frozenset(ids.tolist())
    # every call ranks one training set, or all rows for the full-data fit (training error)
    assert set(seen) <= training_sets | {everything}
    assert training_sets <= set(seen)
    assert result.inclusion.loc[2].sum() == pytest.approx(2.0)


def test_inclusion_matches_rankings_recomputed_per_fold(diabetes):
    # Reference: count, per fold, the top-k columns by |r_regression| on the fold's training rows.
    X, y = diabetes
    plan = cx.CrossValidation(10)
    counts = [1, 2, 3, 6]
    result = cx.sweep(
        cx.FeatureLadder(counts, order="correlation"), X, y, plan=plan, random_state=4
    )
    expected = np.zeros((len(counts), X.shape[1]))
    folds = list(plan.split(X, random_state=4))
    for train, _ in folds:
        order = np.argsort(-np.abs(r_regression(X[train], y[train])), kind="stable")
        for i, k in enumerate(counts):
            expected[i, order[:k]] += 1
    np.testing.assert_allclose(
        result.inclusion.to_numpy(), expected / len(folds), rtol=0, atol=1e-15
    )
    assert list(result.inclusion.index) == counts
    assert list(result.inclusion.columns) == [f"x{j}" for j in range(X.shape[1])]
    # law: every resample includes exactly k predictors at count k
    np.testing.assert_allclose(result.inclusion.sum(axis=1).to_numpy(), counts)


def test_inclusion_for_a_fixed_order_is_zero_one():
    rng = np.random.default_rng(0)
    X, y = rng.standard_normal((30, 4)), rng.standard_normal(30)
    result = cx.sweep(
        cx.FeatureLadder([0, 1, 3], order=[2, 0, 3, 1]), X, y, plan=cx.Bootstrap(5), random_state=0
    )
    expected = np.array([[0, 0, 0, 0], [0, 0, 1, 0], [1, 0, 1, 1]], dtype=float)
    np.testing.assert_array_equal(result.inclusion.to_numpy(), expected)


def test_inclusion_survives_save_and_load(tmp_path):
    rng = np.random.default_rng(3)
    X, y = rng.standard_normal((40, 6)), rng.standard_normal(40)
    result = cx.sweep(
        cx.FeatureLadder([1, 2, 3], order="f-test"), X, y, plan=cx.Bootstrap(7), random_state=1
    )
    back = cx.load_result(result.save(tmp_path / "r.json"))
    pd.testing.assert_frame_equal(back.inclusion, result.inclusion)


def test_ranked_ladders_run_on_the_ranked_engine_and_agree_with_generic():
    # a ranked order has no fixed nested design; engine='exact' takes the ranked exact engine,
    # whose curves must equal the clone-and-fit reference (engine='generic') on the same draws
    rng = np.random.default_rng(0)
    X, y = rng.standard_normal((30, 4)), rng.standard_normal(30)
    ladder = cx.FeatureLadder([1, 2], order="f-test")
    assert ladder.nested_design(X) is None
    assert cx.FeatureLadder([1, 2]).nested_design(X) is not None
    fast = cx.sweep(ladder, X, y, plan=cx.Bootstrap(3), engine="exact", random_state=0)
    slow = cx.sweep(ladder, X, y, plan=cx.Bootstrap(3), engine="generic", random_state=0)
    assert fast.metadata["engine"] == "exact-ranked"
    assert slow.metadata["engine"] == "generic"
    np.testing.assert_allclose(
        fast.curves["test_mse"].to_numpy(), slow.curves["test_mse"].to_numpy(), rtol=1e-10
    )


# ------------------------------------------------------------------ pure noise (the key check)


def test_pure_noise_in_resample_ranking_is_honest_ranking_once_is_optimistic():
    # y independent of 500 random predictors, n = 60 (Ambroise & McLachlan 2002; METHODS.md §11).
    # Any prediction rule fitted without the held-out y has expected squared error
    # >= Var(y) (common practice: E(y0 - f)^2 = Var(y0) + E(f - E y0)^2 when y0 is independent
    # of f), so the honest estimate must not fall clearly below var(y); ranking once on all the
    # data lets the held-out rows pick the predictors and the estimate drops well below var(y).
    # Tolerances come from our own simulation of this exact set-up over 100 seeds (common
    # practice for a Monte-Carlo threshold): honest / var(y) averaged over the counts had mean
    # 1.34, SD 0.19, minimum 0.865; ranking once had at counts 5 and 10 a maximum of 0.829 and
    # 0.817 (means 0.68 and 0.61); honest minus once at count 10 was never below 0.185.
    rng = np.random.default_rng(0)
    X = rng.standard_normal((60, 500))
    y = rng.standard_normal(60)
    var_y = y.var(ddof=1)
    counts = [1, 2, 5, 10]
    plan = cx.CrossValidation(10)
    honest = cx.sweep(
        cx.FeatureLadder(counts, order="correlation"), X, y, plan=plan, random_state=0
    )
    once = _rank_correlation(X, y)[:10].tolist()  # the mistake: ranking on all the data
    leaky = cx.sweep(cx.FeatureLadder(counts, order=once), X, y, plan=plan, random_state=0)
    h = honest.curves["test_mse"] / var_y
    w = leaky.curves["test_mse"] / var_y
    assert 0.85 <= h.mean() <= 2.0
    assert w.loc[5] < 0.85 and w.loc[10] < 0.85
    assert (h.loc[[5, 10]] - w.loc[[5, 10]]).min() > 0.15
    # the leaky run always includes the same predictors; the honest one spreads them out
    assert honest.inclusion.loc[10].gt(0).sum() > 10
    assert leaky.inclusion.loc[10].sum() == 10 and leaky.inclusion.loc[10].isin([0, 1]).all()


# ------------------------------------------------------------------ bad input


@pytest.mark.parametrize(
    ("order", "error", "match"),
    [
        ("pearson", ValueError, "order must be one of 'correlation', 'f-test'; got 'pearson'"),
        (3.5, TypeError, "order must be None, a list of column positions"),
        (b"ab", TypeError, "order must be None"),
    ],
)
def test_bad_order_is_refused(order, error, match):
    with pytest.raises(error, match=match):
        cx.FeatureLadder([1], order=order)


@pytest.mark.parametrize(
    ("returned", "error", "match"),
    [
        (np.array([0.5, 0.1, 0.2]), TypeError, "must return a 1-D sequence of column positions"),
        (np.array([0]), ValueError, "returned 1 column position"),
        (np.array([0, 7, 1]), ValueError, "outside 0..2"),
        (np.array([1, 1, 0]), ValueError, "more than once"),
    ],
)
def test_bad_ranking_from_a_callable_is_reported(returned, error, match):
    rng = np.random.default_rng(0)
    X, y = rng.standard_normal((20, 3)), rng.standard_normal(20)

    def rank(X_train, y_train):
        return returned

    fitted = cx.FeatureLadder([2], order=rank).build(X)[0]
    with pytest.raises(error, match=match):
        fitted.fit(X, y)


def test_ranked_counts_beyond_the_columns_are_refused():
    rng = np.random.default_rng(0)
    X, y = rng.standard_normal((20, 3)), rng.standard_normal(20)
    with pytest.raises(ValueError, match="counts reach 4, but only 3 predictor"):
        cx.sweep(cx.FeatureLadder([1, 4], order="correlation"), X, y, plan=cx.Bootstrap(3))


def test_least_squares_on_too_few_distinct_rows_is_a_failure_not_a_silent_fit():
    # 4 predictors + intercept need 5 distinct training rows; a bootstrap of 6 rows often has
    # fewer. Those fits are reported as failures (never a silent minimum-norm solution).
    rng = np.random.default_rng(0)
    X, y = rng.standard_normal((6, 4)), rng.standard_normal(6)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = cx.sweep(
            cx.FeatureLadder([1, 4], order="correlation"),
            X,
            y,
            plan=cx.Bootstrap(20),
            random_state=0,
        )
    assert result.curves.loc[4, "failed_fits"] > 0
    assert "distinct row" in result.failures.loc[4, "first_message"]
    assert result.curves.loc[1, "failed_fits"] == 0


def test_ranking_inside_simulated_training_sets():
    # With a Simulation every training set is drawn afresh; the ranking runs on each draw. Only
    # x0 carries signal (slope 3 against noise SD 0.5, n = 40), so it is ranked first every time.
    rng = np.random.default_rng(0)
    design = rng.standard_normal((40, 5))
    plan = cx.Simulation(lambda X: 3.0 * X[:, 0], 0.5, design, n_resamples=10)
    result = cx.sweep(cx.FeatureLadder([1, 2], order="correlation"), plan=plan, random_state=0)
    assert result.inclusion.loc[1, "x0"] == 1.0
    assert result.inclusion.loc[2].sum() == pytest.approx(2.0)
