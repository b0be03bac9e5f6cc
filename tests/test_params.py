"""complexity._params: ladders and plans as parameter objects (scikit-learn's get_params protocol).

Outside reference: scikit-learn's ``sklearn.base.clone`` and its parameter conventions
(``get_params(deep=...)``, ``set_params(**params)`` with ``name__parameter`` for nested objects).
"""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.base import clone
from sklearn.linear_model import Ridge
from sklearn.model_selection import GroupKFold
from sklearn.tree import DecisionTreeRegressor

import complexity as cx
from complexity.plans import as_plan


def _truth(X):
    return X[:, 0] ** 2


OBJECTS = {
    "polynomial": cx.PolynomialLadder(range(0, 5), domain=(-1.0, 3.0)),
    "features": cx.FeatureLadder([1, 3, 2], order=[2, 0, 1], estimator=Ridge(alpha=0.5)),
    "ranked features": cx.FeatureLadder(range(1, 4), order="f-test"),
    "parameter": cx.ParamLadder(DecisionTreeRegressor(), "max_depth", [None, 1, 4], "low"),
    "bootstrap": cx.Bootstrap(40),
    "cross-validation": cx.CrossValidation(4, n_repeats=3),
    "simulation": cx.Simulation(_truth, 0.1, np.linspace(0, 1, 12), n_resamples=9),
    "splitter": as_plan(GroupKFold(3)),
}


@pytest.mark.parametrize("name", list(OBJECTS))
def test_init_rebuilds_from_its_own_parameters(name):
    # the contract ParamsMixin relies on: every __init__ argument is stored under its name, in
    # a form __init__ accepts back unchanged
    obj = OBJECTS[name]
    rebuilt = type(obj)(**obj.get_params(deep=False))
    assert rebuilt.describe() == obj.describe()
    assert rebuilt.get_params(deep=False).keys() == obj.get_params(deep=False).keys()


@pytest.mark.parametrize("name", list(OBJECTS))
def test_clone_is_a_new_equal_object(name):
    obj = OBJECTS[name]
    twin = clone(obj)
    assert twin is not obj and type(twin) is type(obj)
    assert twin.describe() == obj.describe() and repr(twin) == repr(obj)
    inner = getattr(obj, "estimator", None)
    if inner is not None:  # scikit-learn's clone of an inner estimator: new, same parameters
        assert twin.estimator is not inner
        assert twin.estimator.get_params() == inner.get_params()


def test_deep_parameters_list_the_inner_estimator():
    params = OBJECTS["features"].get_params(deep=True)
    assert params["estimator__alpha"] == 0.5
    assert sorted(OBJECTS["features"].get_params(deep=False)) == ["counts", "estimator", "order"]


def test_set_params_goes_through_init():
    # settings derived in __init__ follow a new value: ParamLadder sorts its values by `simpler`
    ladder = cx.ParamLadder(DecisionTreeRegressor(), "max_depth", [4, 1, 2], simpler="low")
    assert ladder.capacities == (1, 2, 4)
    ladder.set_params(simpler="high")
    assert ladder.capacities == (4, 2, 1)
    ladder.set_params(estimator__min_samples_leaf=3)
    assert ladder.estimator.min_samples_leaf == 3
    assert ladder.set_params() is ladder


def test_set_params_refuses_like_init_and_changes_nothing():
    plan = cx.CrossValidation(5, n_repeats=2)
    with pytest.raises(ValueError, match=r"n_repeats=2 with shuffle=False would repeat"):
        plan.set_params(shuffle=False)
    assert plan.shuffle is True and plan.n_repeats == 2
    with pytest.raises(ValueError, match=r"'folds' is not a parameter of CrossValidation; "):
        plan.set_params(folds=3)
    with pytest.raises(ValueError, match=r"'n_splits' of CrossValidation has no parameters"):
        plan.set_params(n_splits__x=3)
    ladder = cx.ParamLadder(DecisionTreeRegressor(), "max_depth", [1, 2])
    with pytest.raises(ValueError, match=r"param='depth' is not a parameter of"):
        ladder.set_params(param="depth")
    assert ladder.param == "max_depth"


def test_a_subclass_that_renames_its_parameters_is_named_and_still_clones():
    class Renamed(cx.Bootstrap):
        def __init__(self, count: int = 10) -> None:
            super().__init__(n_resamples=count)

    plan = Renamed(7)
    with pytest.raises(
        AttributeError, match=r"Renamed does not store its __init__ parameter 'count'"
    ):
        plan.get_params()
    twin = clone(plan)  # falls back to a deep copy, as scikit-learn does for plain objects
    assert twin is not plan and twin.n_resamples == 7
