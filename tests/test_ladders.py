"""Tests for complexity.ladders: capacity order, model building, data checks."""

import numpy as np
import pytest
from sklearn.linear_model import Ridge
from sklearn.neighbors import KNeighborsRegressor
from sklearn.tree import DecisionTreeRegressor

import complexity as cx


def test_polynomial_degrees_sorted_and_models_fit_exactly():
    ladder = cx.PolynomialLadder([3, 0, 1])
    assert ladder.capacities == (0, 1, 3)
    x = np.linspace(1e9, 1e9 + 2, 9)[:, None]  # a huge offset: the mapped basis keeps full accuracy
    y = 2.0 - (x[:, 0] - 1e9) ** 3
    models = ladder.build(x)
    fit = models[-1].fit(x, y)
    # reference: the cubic itself (a degree-3 least-squares fit of an exact cubic is exact)
    assert np.max(np.abs(fit.predict(x) - y)) < 1e-9


def test_param_ladder_order_by_simpler_end():
    assert cx.ParamLadder(
        KNeighborsRegressor(), "n_neighbors", [1, 10, 5], simpler="high"
    ).capacities == (10, 5, 1)
    assert cx.ParamLadder(DecisionTreeRegressor(), "max_depth", [None, 2, 8]).capacities == (
        2,
        8,
        None,
    )
    assert cx.ParamLadder(Ridge(), "alpha", [1.0, 0.01], simpler="first").capacities == (1.0, 0.01)
    models = cx.ParamLadder(Ridge(), "alpha", [0.1, 10.0], simpler="high").build(np.zeros((3, 1)))
    assert [m.alpha for m in models] == [10.0, 0.1]


@pytest.mark.parametrize(
    ("make", "match"),
    [
        (
            lambda: cx.ParamLadder(Ridge(), "depth", [1, 2]),
            r"param='depth' is not a parameter of Ridge",
        ),
        (
            lambda: cx.ParamLadder("tree", "max_depth", [1]),
            r"estimator must be a scikit-learn estimator",
        ),
        (
            lambda: cx.ParamLadder(Ridge(), "alpha", [1.0, 1.0]),
            r"values contains 1.0 more than once",
        ),
        (lambda: cx.ParamLadder(Ridge(), "alpha", [1.0, "a"]), r"cannot be ordered"),
        (
            lambda: cx.ParamLadder(Ridge(), "alpha", [1.0], simpler="left"),
            r"simpler must be one of",
        ),
        (lambda: cx.FeatureLadder([0, -2]), r"counts must contain whole numbers >= 0"),
        (
            lambda: cx.FeatureLadder([1], order=5),
            r"order must be None, a list of column positions or names.*got 5",
        ),
        (lambda: cx.PolynomialLadder([1], domain=(2.0, 1.0)), r"domain must be a finite interval"),
    ],
)
def test_ladder_bad_arguments(make, match):
    with pytest.raises((TypeError, ValueError), match=match):
        make()


def test_feature_ladder_checks_counts_against_data():
    X = np.random.default_rng(0).normal(size=(10, 3))
    with pytest.raises(ValueError, match="counts reach 5, but only 3 predictor"):
        cx.FeatureLadder([1, 5]).check_data(X, None)
    with pytest.raises(ValueError, match="order contains column position 7"):
        cx.FeatureLadder([1], order=[7]).check_data(X, None)


def test_polynomial_interpolation_warning_and_training_shortfall():
    x = np.repeat(np.arange(4.0), 2)[:, None]
    warnings = cx.PolynomialLadder([0, 3]).check_data(x, None)
    assert any("interpolates" in w for w in warnings)
    assert "needs 4" in cx.PolynomialLadder([3]).training_shortfall(0, x[:4])


def test_reprs():
    assert repr(cx.PolynomialLadder([0, 1])) == "PolynomialLadder(degrees=[0, 1], domain=None)"
