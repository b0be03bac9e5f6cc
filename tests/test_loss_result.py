"""`cx.sweep(..., loss=...)`: the loss path behind the one entry point, and its SweepResult."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.datasets import load_iris
from sklearn.model_selection import KFold, cross_val_score
from sklearn.tree import DecisionTreeClassifier

import complexity as cx
from complexity._classify import classification_sweep


@pytest.fixture(scope="module")
def iris():
    return load_iris(return_X_y=True)


def _tree_ladder():
    return cx.ParamLadder(DecisionTreeClassifier(random_state=0), "max_depth", [1, 2, 3])


def test_a_classifier_sweep_scores_the_error_rate_like_cross_val_score(iris):
    X, y = iris
    folds = KFold(5, shuffle=True, random_state=3)
    result = cx.sweep(_tree_ladder(), X, y, plan=folds, random_state=0)
    assert result.loss == "zero-one" and result.noise is None
    for depth in (1, 2, 3):
        # reference library: scikit-learn's cross_val_score on the same folds (150 rows in five
        # folds of 30, so the mean of fold accuracies is the pooled accuracy)
        acc = cross_val_score(
            DecisionTreeClassifier(random_state=0, max_depth=depth), X, y, cv=folds
        )
        assert result.curves.loc[depth, "test_loss"] == pytest.approx(1 - acc.mean(), abs=1e-12)


def test_sweep_hands_over_unchanged(iris):
    X, y = iris
    plan = cx.CrossValidation(5, n_repeats=2)
    via_sweep = cx.sweep(_tree_ladder(), X, y, plan=plan, loss="brier", random_state=4)
    direct = classification_sweep(_tree_ladder(), X, y, plan=plan, loss="brier", random_state=4)
    assert via_sweep.curves.equals(direct.curves)
    assert via_sweep.recommended == direct.recommended
    assert via_sweep.metadata["loss"] == "brier"


def test_string_labels_and_summary_and_round_trip(iris, tmp_path):
    X, y = iris
    names = np.array(["setosa", "versicolor", "virginica"])[y]
    result = cx.sweep(_tree_ladder(), X, names, plan=cx.CrossValidation(5), random_state=0)
    assert result.metadata["classes"] == ["setosa", "versicolor", "virginica"]
    text = result.summary()
    assert "test_loss" in text and "Loss zero-one" in text
    back = cx.load_result(result.save(tmp_path / "r.json"))
    assert back.noise is None and back.curves.equals(result.curves)


@pytest.mark.parametrize(
    "option",
    [{"sample_weight": np.ones(150)}, {"keep_predictions": True}, {"noise": 0.1}],
)
def test_squared_error_only_options_are_refused_by_name(iris, option):
    X, y = iris
    name = next(iter(option))
    with pytest.raises(ValueError, match=rf"(?s){name}=.*squared-error sweeps"):
        cx.sweep(_tree_ladder(), X, y, plan=cx.CrossValidation(3), **option)


def test_figures_say_they_are_for_squared_error(iris):
    X, y = iris
    result = cx.sweep(_tree_ladder(), X, y, plan=cx.CrossValidation(3), random_state=0)
    with pytest.raises(ValueError, match="squared-error sweeps; this result's loss is 'zero-one'"):
        result.plot("errors")


def test_a_regression_ladder_under_absolute_error():
    # common practice: absolute error is the mean of |prediction - y|; the squared-error
    # columns are absent, the split is stated as not defined
    X, y = cx.datasets.pressure_sensor()
    result = cx.sweep(
        cx.PolynomialLadder(range(0, 4)), X, y, plan=cx.CrossValidation(5), loss="absolute-error"
    )
    assert "test_mse" not in result.curves and "test_loss" in result.curves
    assert result.curves["test_loss"].iloc[0] > result.curves["test_loss"].iloc[2]


def test_predict_delegates_to_the_bands_module():
    from complexity import bands

    X, y = cx.datasets.pressure_sensor()
    result = cx.sweep(cx.PolynomialLadder(range(0, 4)), X, y, plan=cx.Bootstrap(10), random_state=0)
    col = X.iloc[:, 0]
    x_new = np.linspace(float(col.min()), float(col.max()), 5)
    ours = result.predict(x_new, X, y, interval="prediction")
    direct = bands.predict(result, X, y, x_new, interval="prediction")
    assert ours.equals(direct)
