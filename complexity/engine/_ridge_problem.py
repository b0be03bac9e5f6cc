"""What the ridge engine reads from a problem: the penalties, and whether it may serve it.

The ridge engine (:mod:`complexity.engine.ridge`) serves a ladder whose every model is
scikit-learn's ``Ridge`` with an intercept, differing only in a positive scalar ``alpha``,
optionally behind one ``StandardScaler`` in a ``Pipeline``. Anything else (sample weights,
other steps, ``positive=True``, an array of penalties, a subclass) is left to the generic
engine: :func:`ridge_spec` returns None then.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .._contract import Problem

__all__ = ["RidgeSpec", "ridge_spec"]

# the parameters of Ridge that change the answer it converges to; the others (solver, tol,
# max_iter, copy_X, random_state) only decide how it gets there
_FIXED = {"fit_intercept": True, "positive": False}


@dataclass(frozen=True)
class RidgeSpec:
    """The penalty of every capacity and whether the columns are standardised first.

    Attributes
    ----------
    alphas : ndarray of shape (n_capacities,)
        The ridge penalty of each capacity (all positive and finite).
    scale : bool
        True when a ``StandardScaler(with_std=True)`` precedes the ridge: each training set's
        columns are divided by their standard deviation on that set (centring is implied by
        the intercept either way).
    """

    alphas: NDArray[np.float64]
    scale: bool


def _split(model: Any) -> tuple[Any, bool] | None:
    """``(ridge, scale)`` of a bare Ridge or a StandardScaler -> Ridge pipeline; else None."""
    from sklearn.linear_model import Ridge
    from sklearn.pipeline import Pipeline
    from sklearn.preprocessing import StandardScaler

    if type(model) is Ridge:
        return model, False
    if type(model) is not Pipeline:
        return None
    steps = [step for _, step in model.steps if step not in (None, "passthrough")]
    if len(steps) == 1 and type(steps[0]) is Ridge:
        return steps[0], False
    if len(steps) != 2 or type(steps[0]) is not StandardScaler or type(steps[1]) is not Ridge:
        return None
    scaler = steps[0]
    if getattr(scaler, "copy", True) is not True:  # with copy=False X would be changed
        return None
    return steps[1], bool(scaler.with_std)


def _alpha(ridge: Any) -> float | None:
    """The ridge's penalty as a positive finite float, or None (arrays, zero, NaN, strings)."""
    value = ridge.alpha
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, (int, float, np.number)):
        return None
    alpha = float(value)
    return alpha if np.isfinite(alpha) and alpha > 0 else None


def ridge_spec(problem: Problem) -> RidgeSpec | None:
    """The penalties of a ridge ladder, or None when the ridge engine must not serve it.

    Examples
    --------
    >>> import numpy as np
    >>> import complexity as cx
    >>> from sklearn.linear_model import Ridge
    >>> from complexity._contract import Problem
    >>> X = np.linspace(0, 1, 20)[:, None]
    >>> ladder = cx.ParamLadder(Ridge(), "alpha", [0.1, 1.0, 10.0])
    >>> problem = Problem(ladder, ladder.build(X), X, X[:, 0], X, X[:, 0], cx.Bootstrap(5),
    ...                   np.random.SeedSequence(0), X)
    >>> ridge_spec(problem).alphas.tolist()
    [0.1, 1.0, 10.0]
    """
    if problem.sample_weight is not None or not problem.models:
        return None
    alphas, scales, others = [], set(), []
    for model in problem.models:
        parts = _split(model)
        if parts is None:
            return None
        ridge, scale = parts
        # attributes, not get_params (which inspects signatures: slow for long ladders)
        if any(getattr(ridge, k, None) is not v for k, v in _FIXED.items()):
            return None
        alpha = _alpha(ridge)
        if alpha is None:
            return None
        alphas.append(alpha)
        scales.add(scale)
        others.append(type(model))
    if len(scales) != 1 or len(set(others)) != 1:
        return None
    return RidgeSpec(np.asarray(alphas, dtype=np.float64), scales.pop())
