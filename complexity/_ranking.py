"""Predictor rankings for feature ladders, and the transformer that keeps the first k columns.

A :class:`~complexity.FeatureLadder` with a ranked order recomputes the ranking inside every
training set (:func:`ranking`): by absolute correlation with y, or by forward selection on the
partial F statistic, or by a user's callable (checked by :func:`check_ranking`).
:class:`FirstColumns` is the pipeline step that applies a fixed or ranked order in ``fit``.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import NDArray
from sklearn.base import BaseEstimator, TransformerMixin

from ._validation import _short_repr

__all__ = ["RANKINGS", "FirstColumns", "callable_name", "check_ranking", "ranking"]

#: the built-in rankings a FeatureLadder can recompute inside every training set
RANKINGS = ("correlation", "f-test")


def _rank_correlation(X: NDArray[np.float64], y: NDArray[np.float64]) -> NDArray[np.intp]:
    """Column positions by decreasing absolute Pearson correlation with y (ties: lower first).

    A constant column (or a constant y) has no correlation; it ranks after every other column.
    """
    Xc = X - X.mean(axis=0)
    yc = y - y.mean()
    scale = np.sqrt(np.einsum("ij,ij->j", Xc, Xc)) * np.sqrt(yc @ yc)
    with np.errstate(divide="ignore", invalid="ignore"):
        score = np.abs(Xc.T @ yc) / scale
    score[~np.isfinite(score)] = -1.0
    return np.argsort(-score, kind="stable")


def _rank_forward_f(
    X: NDArray[np.float64], y: NDArray[np.float64], n_steps: int
) -> NDArray[np.intp]:
    """Forward selection by the partial F statistic (F-to-enter), with an intercept.

    At each step the column with the largest partial F given the columns already chosen enters.
    For a fixed current model that is the column whose entry reduces the residual sum of squares
    most, i.e. the largest ``(q_j . r)^2 / (q_j . q_j)`` with ``q_j`` the column made orthogonal to
    the chosen ones (and the intercept) and ``r`` the current residual. The first step is the
    univariate F test, which ranks like the absolute correlation. Columns that are (numerically)
    in the span of the chosen ones cannot enter; they follow, in column order, once no column can.
    """
    p = X.shape[1]
    R = X - X.mean(axis=0)
    r = y - y.mean()
    size0 = np.einsum("ij,ij->j", R, R)
    free = np.ones(p, dtype=bool)
    chosen: list[int] = []
    for _ in range(min(n_steps, p)):
        den = np.einsum("ij,ij->j", R, R)
        usable = free & (den > 1e-10 * np.maximum(size0, np.finfo(float).tiny))
        if not usable.any():
            break
        with np.errstate(divide="ignore", invalid="ignore"):
            score = np.where(usable, (R.T @ r) ** 2 / den, -1.0)
        j = int(np.argmax(score))  # first position on ties
        q = R[:, j] / np.sqrt(den[j])
        r = r - q * (q @ r)
        R = R - np.outer(q, q @ R)
        free[j] = False
        chosen.append(j)
    rest = [j for j in range(p) if free[j]]
    return np.array(chosen + rest, dtype=np.intp)


def callable_name(func: Any) -> str:
    return getattr(func, "__qualname__", None) or getattr(func, "__name__", None) or repr(func)


def check_ranking(func: Any, returned: Any, p: int, n_needed: int) -> NDArray[np.intp]:
    """Validate what a user's ranking function returned."""
    name = callable_name(func)
    arr = np.asarray(returned)
    if arr.ndim != 1 or arr.dtype.kind not in "iu":
        raise TypeError(
            f"order={name} must return a 1-D sequence of column positions (ints), best first; "
            f"got {_short_repr(returned)}."
        )
    if arr.size < n_needed:
        raise ValueError(
            f"order={name} returned {arr.size} column position(s), but {n_needed} are needed; "
            "return at least as many positions as the largest count (e.g. a full ranking)."
        )
    if arr.size and (arr.min() < 0 or arr.max() >= p):
        raise ValueError(
            f"order={name} returned column position(s) outside 0..{p - 1}: "
            f"{_short_repr(arr.tolist())}."
        )
    if np.unique(arr).size != arr.size:
        raise ValueError(
            f"order={name} returned a column more than once: {_short_repr(arr.tolist())}."
        )
    return arr.astype(np.intp)


def ranking(
    order: Any, X: NDArray[np.float64], y: NDArray[np.float64], n_needed: int
) -> NDArray[np.intp]:
    """Column positions, best first, by the ranked ``order`` computed on ``(X, y)`` only.

    At least ``n_needed`` positions are returned.
    """
    if isinstance(order, str):
        if order == "correlation":
            return _rank_correlation(X, y)
        return _rank_forward_f(X, y, n_needed)
    return check_ranking(order, order(X, y), X.shape[1], n_needed)


class FirstColumns(TransformerMixin, BaseEstimator):
    """Keep ``k`` columns of X: the first k of a fixed order, or the best k by a ranking.

    ``order`` is None (column order), a list of column positions, or a ranked order
    (``"correlation"``, ``"f-test"`` or a callable ``(X, y) -> positions``); a ranked order is
    computed in :meth:`fit`, on the training data it is given only, so inside a resampling loop
    it is recomputed for every training set.
    """

    def __init__(self, k: int = 1, order: Any = None) -> None:
        self.k = k
        self.order = order

    def fit(self, X: Any, y: Any = None) -> FirstColumns:
        X = np.asarray(X, dtype=np.float64)
        if self.order is None:
            order = np.arange(X.shape[1])
        elif isinstance(self.order, str) or callable(self.order):
            if y is None:
                raise ValueError(
                    f"order={self.order!r} ranks columns by their relation to y; y is None."
                )
            order = ranking(self.order, X, np.asarray(y, dtype=np.float64), self.k)
        else:
            order = np.asarray(self.order)
        self.columns_ = order[: self.k].astype(np.intp)
        self.n_features_in_ = X.shape[1]
        return self

    def transform(self, X: Any) -> NDArray[np.float64]:
        return np.asarray(X)[:, self.columns_]
