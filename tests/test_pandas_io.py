"""pandas in and out: column names, Series y, groups for group-aware splitters, sample weights.

Outside references: scikit-learn's ``cross_val_score`` (with ``groups=`` and with sample weights
passed to fit), ``GroupKFold`` itself, ``r_regression``, and statsmodels WLS for weighted least
squares. Data: ``sklearn.datasets.load_diabetes`` as a DataFrame (shipped with scikit-learn).
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_diabetes
from sklearn.feature_selection import r_regression
from sklearn.linear_model import LinearRegression, Ridge
from sklearn.model_selection import GroupKFold, cross_val_score
from sklearn.neighbors import KNeighborsRegressor

import complexity as cx

pytestmark = pytest.mark.filterwarnings("ignore::complexity.CapacityWarning")


@pytest.fixture(scope="module")
def frame():
    X, y = load_diabetes(return_X_y=True, as_frame=True)
    return X, y


def _pooled(scores, folds):
    sizes = np.array([len(test) for _, test in folds], dtype=float)
    return float(np.sum(-scores * sizes) / sizes.sum())


# ------------------------------------------------------------------ names in, names out


def test_order_by_column_names_equals_order_by_positions(frame):
    X, y = frame
    names = ["bmi", "s5", "bp", "s3"]
    by_name = cx.sweep(
        cx.FeatureLadder([1, 2, 4], order=names), X, y, plan=cx.Bootstrap(6), random_state=0
    )
    positions = [list(X.columns).index(n) for n in names]
    by_pos = cx.sweep(
        cx.FeatureLadder([1, 2, 4], order=positions),
        X.to_numpy(),
        y.to_numpy(),
        plan=cx.Bootstrap(6),
        random_state=0,
    )
    pd.testing.assert_series_equal(by_name.curves["test_mse"], by_pos.curves["test_mse"])
    assert by_name.metadata["feature_names"] == list(X.columns)
    assert list(by_name.inclusion.columns) == list(X.columns)
    assert by_name.inclusion.loc[2, ["bmi", "s5"]].tolist() == [1.0, 1.0]
    assert by_name.inclusion.loc[2].sum() == 2.0
    assert list(by_pos.inclusion.columns) == [f"x{j}" for j in range(X.shape[1])]


def test_ranked_ladder_reports_inclusion_by_name(frame):
    X, y = frame
    result = cx.sweep(
        cx.FeatureLadder([1, 3], order="correlation"),
        X,
        y,
        plan=cx.CrossValidation(5),
        random_state=0,
    )
    # Reference: the column with the largest |Pearson r| on all rows (sklearn r_regression); with
    # 4/5 of the rows in each training set it wins in most folds.
    top = X.columns[int(np.argmax(np.abs(r_regression(X, y))))]
    assert result.inclusion.loc[1].idxmax() == top
    assert result.inclusion.loc[1, top] >= 0.6
    assert result.inclusion.index.name == "n_features"


def test_selector_keeps_feature_names(frame):
    X, y = frame
    sel = cx.ComplexitySelector(
        cx.FeatureLadder(range(1, 6), order="f-test"), plan=cx.CrossValidation(4), random_state=0
    ).fit(X, y)
    assert list(sel.feature_names_in_) == list(X.columns)
    assert list(sel.result_.inclusion.columns) == list(X.columns)
    assert sel.result_.metadata["feature_names"] == list(X.columns)
    pred_frame = sel.predict(X)
    with warnings.catch_warnings():
        warnings.simplefilter(
            "ignore", UserWarning
        )  # sklearn: "X does not have valid feature names"
        pred_array = sel.predict(X.to_numpy())
    np.testing.assert_array_equal(pred_frame, pred_array)
    with pytest.raises(ValueError, match="feature names"):
        sel.predict(X[X.columns[::-1]])  # sklearn refuses columns in another order


def test_series_y_and_one_column_frame_y_are_accepted(frame):
    X, y = frame
    ladder = cx.FeatureLadder([1, 2])
    a = cx.sweep(ladder, X, y, plan=cx.Bootstrap(4), random_state=1)
    b = cx.sweep(ladder, X, y.to_frame(), plan=cx.Bootstrap(4), random_state=1)
    c = cx.sweep(ladder, X.to_numpy(), y.to_numpy(), plan=cx.Bootstrap(4), random_state=1)
    pd.testing.assert_frame_equal(a.curves, b.curves)
    np.testing.assert_array_equal(a.curves["test_mse"], c.curves["test_mse"])
    assert isinstance(a.curves, pd.DataFrame) and isinstance(a.stability, pd.Series)


# ------------------------------------------------------------------ groups


def _groups(n):
    return pd.Series(np.arange(n) % 9, name="clinic")  # nine made-up groups


def test_groups_reach_group_kfold(frame):
    # Reference: cross_val_score with the same GroupKFold and groups.
    X, y = frame
    g = _groups(len(y))
    result = cx.sweep(cx.FeatureLadder([2, 5]), X, y, plan=GroupKFold(3), groups=g, random_state=0)
    folds = list(GroupKFold(3).split(X, y, g))
    for _, test in folds:  # no group on both sides of a split
        assert set(g.iloc[test]).isdisjoint(set(g.drop(index=test)))
    for k in (2, 5):
        scores = cross_val_score(
            LinearRegression(),
            X.iloc[:, :k],
            y,
            groups=g,
            cv=GroupKFold(3),
            scoring="neg_mean_squared_error",
        )
        assert result.curves.loc[k, "test_mse"] == pytest.approx(_pooled(scores, folds), rel=1e-10)


def test_selector_passes_groups_through(frame):
    X, y = frame
    g = _groups(len(y))
    sel = cx.ComplexitySelector(cx.FeatureLadder([2, 5]), plan=GroupKFold(3), random_state=0)
    sel.fit(X, y, groups=g)
    direct = cx.sweep(cx.FeatureLadder([2, 5]), X, y, plan=GroupKFold(3), groups=g, random_state=0)
    pd.testing.assert_series_equal(sel.result_.curves["test_mse"], direct.curves["test_mse"])
    with pytest.raises(ValueError, match="groups"):
        cx.ComplexitySelector(cx.FeatureLadder([2]), plan=GroupKFold(3)).fit(X, y)


# ------------------------------------------------------------------ sample weights


def _weights(n):
    return pd.Series(1.0 + (np.arange(n) % 4), name="w")


def test_sample_weight_in_every_fit_matches_cross_val_score(frame):
    # Reference: cross_val_score passing sample_weight to LinearRegression.fit (scored unweighted,
    # like the sweep's test error).
    X, y = frame
    w = _weights(len(y))
    plan = cx.CrossValidation(5)
    folds = list(plan.split(X, random_state=3))
    result = cx.sweep(cx.FeatureLadder([1, 4]), X, y, plan=plan, sample_weight=w, random_state=3)
    assert result.metadata["engine"] == "exact"  # weighted least squares
    for k in (1, 4):
        scores = cross_val_score(
            LinearRegression(),
            X.iloc[:, :k],
            y,
            cv=folds,
            scoring="neg_mean_squared_error",
            params={"sample_weight": w.to_numpy()},
        )
        assert result.curves.loc[k, "test_mse"] == pytest.approx(_pooled(scores, folds), rel=1e-10)


def test_selector_refits_with_weights_like_weighted_least_squares(frame):
    # Reference: statsmodels WLS on the chosen columns with the same weights.
    sm = pytest.importorskip("statsmodels.api")
    X, y = frame
    w = _weights(len(y))
    sel = cx.ComplexitySelector(cx.FeatureLadder([2, 3, 4]), plan=cx.Bootstrap(6), random_state=0)
    sel.fit(X, y, sample_weight=w)
    k = sel.capacity_
    wls = sm.WLS(
        y.to_numpy(), sm.add_constant(X.iloc[:, :k].to_numpy()), weights=w.to_numpy()
    ).fit()
    final = sel.estimator_[-1]
    np.testing.assert_allclose(final.intercept_, wls.params[0], rtol=1e-9)
    np.testing.assert_allclose(final.coef_, wls.params[1:], rtol=1e-9)


def test_weights_reach_the_last_step_of_a_pipeline_ladder(frame):
    X, y = frame
    w = _weights(len(y)).to_numpy()
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    ladder = cx.ParamLadder(
        make_pipeline(StandardScaler(), Ridge()), "ridge__alpha", [0.1, 10.0], simpler="high"
    )
    plan = cx.CrossValidation(4)
    folds = list(plan.split(X, random_state=2))
    result = cx.sweep(ladder, X, y, plan=plan, sample_weight=w, random_state=2)
    scores = cross_val_score(
        make_pipeline(StandardScaler(), Ridge(alpha=10.0)),
        X,
        y,
        cv=folds,
        scoring="neg_mean_squared_error",
        params={"ridge__sample_weight": w},
    )
    assert result.curves.loc[10.0, "test_mse"] == pytest.approx(_pooled(scores, folds), rel=1e-10)


def test_sample_weight_with_an_estimator_that_cannot_take_it_is_a_clear_error(frame):
    X, y = frame
    w = _weights(len(y))
    ladder = cx.ParamLadder(KNeighborsRegressor(), "n_neighbors", [5, 20], simpler="high")
    msg = r"sample_weight was given, but KNeighborsRegressor\.fit takes no sample_weight"
    with pytest.raises(TypeError, match=msg):
        cx.sweep(ladder, X, y, plan=cx.Bootstrap(3), sample_weight=w)
    with pytest.raises(TypeError, match=msg):
        cx.ComplexitySelector(ladder, plan=cx.Bootstrap(3)).fit(X, y, sample_weight=w)
    with pytest.raises(ValueError, match="sample_weight is zero for every row"):
        cx.ComplexitySelector(cx.FeatureLadder([1]), plan=cx.Bootstrap(3)).fit(
            X, y, sample_weight=0 * w
        )


def test_inputs_are_not_modified(frame):
    X, y = frame
    X0, y0 = X.copy(), y.copy()
    w = _weights(len(y))
    w0 = w.copy()
    cx.ComplexitySelector(
        cx.FeatureLadder([1, 2], order="correlation"), plan=cx.Bootstrap(4), random_state=0
    ).fit(X, y, sample_weight=w)
    pd.testing.assert_frame_equal(X, X0)
    pd.testing.assert_series_equal(y, y0)
    pd.testing.assert_series_equal(w, w0)


def test_coefficients_are_labelled_with_the_dataframe_columns():
    # a user's column names label the terms: feature counts and polynomial powers alike

    X, y = load_diabetes(return_X_y=True, as_frame=True)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        counts = cx.sweep(cx.FeatureLadder(range(1, 4)), X, y, plan=cx.Bootstrap(5))
        df = pd.DataFrame({"temperature": np.linspace(-20.0, 60.0, 30)})
        poly = cx.sweep(cx.PolynomialLadder(range(0, 3)), df, np.cos(df["temperature"] / 40))
    assert list(counts.coefficients(3).index) == ["intercept", "age", "sex", "bmi"]
    assert list(poly.coefficients(2).index) == ["1", "temperature", "temperature^2"]
