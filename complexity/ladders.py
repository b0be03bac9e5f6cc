"""Ladders: ordered families of models of growing capacity.

A ladder knows its capacity values (ordered from the simplest model to the most complex one) and
how to build an unfitted scikit-learn estimator at each of them. The sweep fits those estimators on
every resampled training set; least-squares ladders are also served by the exact engine.
"""

from __future__ import annotations

import math
import numbers
from collections.abc import Iterable, Sequence
from typing import Any

import numpy as np
from numpy.typing import NDArray
from sklearn.base import BaseEstimator, TransformerMixin, clone
from sklearn.dummy import DummyRegressor
from sklearn.linear_model import LinearRegression
from sklearn.pipeline import Pipeline

from ._validation import _short_repr, check_option

__all__ = ["FeatureLadder", "Ladder", "ParamLadder", "PolynomialLadder"]


class Ladder:
    """Base class of all ladders (not used directly).

    Subclasses set :attr:`capacities` (simplest first) and :attr:`capacity_name`, and implement
    :meth:`build`, which returns one unfitted estimator per capacity for the given data.
    """

    capacity_name: str = "capacity"
    #: True when every model of the ladder is ordinary least squares on nested column sets, so
    #: the exact engine and the closed-form criteria apply.
    linear_least_squares: bool = False

    @property
    def capacities(self) -> tuple[Any, ...]:
        raise NotImplementedError

    def check_data(self, X: NDArray[np.float64], feature_names: tuple[str, ...] | None) -> list[str]:
        """Check that the data can support every capacity; return warnings (strings).

        Raises ``ValueError`` when a capacity cannot be fitted at all on the full data.
        """
        return []

    def build(self, X: NDArray[np.float64], feature_names: tuple[str, ...] | None = None) -> list[Any]:
        """Return one unfitted estimator per capacity, with any data-derived settings fixed from X."""
        raise NotImplementedError

    def training_problem(self, index: int, X_train: NDArray[np.float64]) -> str | None:
        """Return why capacity ``index`` cannot be fitted on ``X_train``, or None if it can."""
        return None

    def describe(self) -> dict[str, Any]:
        """A JSON-friendly description, stored with every result."""
        raise NotImplementedError

    def __repr__(self) -> str:
        desc = self.describe()
        args = ", ".join(f"{k}={v!r}" for k, v in desc.items() if k != "kind")
        return f"{type(self).__name__}({args})"


def _check_capacity_list(name: str, values: Any) -> list[Any]:
    if isinstance(values, (str, bytes)) or not isinstance(values, Iterable):
        raise TypeError(f"{name} must be a list or range of values; got {_short_repr(values)}.")
    values = list(values)
    if not values:
        raise ValueError(f"{name} is empty; give at least one capacity value, e.g. range(0, 11).")
    return values


def _check_int_ladder(name: str, values: Any, minimum: int) -> tuple[int, ...]:
    values = _check_capacity_list(name, values)
    out = []
    for v in values:
        if isinstance(v, bool) or not isinstance(v, numbers.Integral):
            raise TypeError(
                f"{name} must contain whole numbers >= {minimum}; got {_short_repr(v)} "
                f"in {_short_repr(values)}."
            )
        if v < minimum:
            raise ValueError(f"{name} must contain whole numbers >= {minimum}; got {int(v)}.")
        out.append(int(v))
    if len(set(out)) != len(out):
        dup = sorted({v for v in out if out.count(v) > 1})
        raise ValueError(f"{name} contains repeated values {dup}; give each capacity once.")
    return tuple(sorted(out))


def _n_terms(n_predictors: int, degree: int) -> int:
    """Number of monomials of total degree <= ``degree`` in ``n_predictors`` variables."""
    return math.comb(n_predictors + degree, degree)


def _distinct_rows(X: NDArray[np.float64]) -> int:
    return int(np.unique(X, axis=0).shape[0])


class PolynomialLadder(Ladder):
    """Polynomial degree as the capacity, on a numerically stable basis.

    Each predictor is mapped affinely onto [-1, 1] (using the full data range, or ``domain``) and
    the model at degree ``d`` is least squares on the Legendre polynomials of total degree <= d
    (products across predictors when X has several columns). Raw powers of x are never formed,
    so high degrees stay accurate even for x far from zero.

    Parameters
    ----------
    degrees : iterable of int, default=range(0, 13)
        The degrees to sweep (whole numbers >= 0). They are sorted; repeats are refused.
    domain : tuple of float, optional
        ``(low, high)`` interval mapped onto [-1, 1], for one predictor. Default: the data range.

    Examples
    --------
    >>> import complexity as cx
    >>> ladder = cx.PolynomialLadder(degrees=range(0, 4))
    >>> ladder.capacities
    (0, 1, 2, 3)
    """

    capacity_name = "degree"
    linear_least_squares = True

    def __init__(
        self, degrees: Iterable[int] = range(0, 13), domain: tuple[float, float] | None = None
    ) -> None:
        self.degrees = _check_int_ladder("degrees", degrees, 0)
        if domain is not None:
            try:
                lo, hi = (float(domain[0]), float(domain[1]))
            except (TypeError, ValueError, IndexError):
                raise TypeError(f"domain must be a (low, high) pair of numbers; got {_short_repr(domain)}.") from None
            if not (np.isfinite(lo) and np.isfinite(hi) and hi > lo):
                raise ValueError(f"domain must be a finite interval with low < high; got {domain!r}.")
            domain = (lo, hi)
        self.domain = domain

    @property
    def capacities(self) -> tuple[int, ...]:
        return self.degrees

    def _domain_for(self, X: NDArray[np.float64]) -> NDArray[np.float64]:
        if self.domain is not None:
            if X.shape[1] != 1:
                raise ValueError(
                    f"domain={self.domain!r} is for one predictor, but X has {X.shape[1]} columns; "
                    "leave domain=None to use each column's data range."
                )
            return np.array([self.domain], dtype=np.float64)
        return np.column_stack([X.min(axis=0), X.max(axis=0)])

    def check_data(self, X: NDArray[np.float64], feature_names: tuple[str, ...] | None) -> list[str]:
        spans = X.max(axis=0) - X.min(axis=0)
        if np.any(spans == 0):
            col = int(np.flatnonzero(spans == 0)[0])
            label = feature_names[col] if feature_names else f"column {col}"
            raise ValueError(
                f"X {label} is constant (every value is {X[0, col]!r}); a polynomial in it cannot "
                "be fitted. Drop the column or vary it."
            )
        distinct = _distinct_rows(X)
        top = max(self.degrees)
        need = _n_terms(X.shape[1], top)
        if need > distinct:
            usable = [d for d in self.degrees if _n_terms(X.shape[1], d) <= distinct]
            raise ValueError(
                f"degrees reach {top}, which needs {need} coefficients, but X has only {distinct} "
                f"distinct point(s). Use degrees up to {max(usable) if usable else 0} "
                f"(e.g. degrees=range(0, {(max(usable) if usable else 0) + 1}))."
            )
        warnings = []
        if need == distinct:
            warnings.append(
                f"degree {top} has as many coefficients as there are distinct x values ({distinct}): "
                "it interpolates the data, so its training error is zero and says nothing."
            )
        return warnings

    def build(self, X: NDArray[np.float64], feature_names: tuple[str, ...] | None = None) -> list[Any]:
        from .basis import LegendreFeatures

        domain = self._domain_for(X)
        return [
            Pipeline(
                [
                    ("legendre", LegendreFeatures(degree=d, domain=domain)),
                    ("least_squares", LinearRegression(fit_intercept=False)),
                ]
            )
            for d in self.degrees
        ]

    def training_problem(self, index: int, X_train: NDArray[np.float64]) -> str | None:
        need = _n_terms(X_train.shape[1], self.degrees[index])
        have = _distinct_rows(X_train)
        if have < need:
            return (
                f"training set has {have} distinct x value(s); degree {self.degrees[index]} "
                f"needs {need}"
            )
        return None

    def describe(self) -> dict[str, Any]:
        return {"kind": "polynomial", "degrees": list(self.degrees), "domain": self.domain}


class _FirstColumns(TransformerMixin, BaseEstimator):
    """Keep the first ``k`` columns of X in the order ``order`` (a list of column positions)."""

    def __init__(self, k: int = 1, order: Sequence[int] | None = None) -> None:
        self.k = k
        self.order = order

    def fit(self, X: Any, y: Any = None) -> _FirstColumns:
        X = np.asarray(X)
        order = np.arange(X.shape[1]) if self.order is None else np.asarray(self.order)
        self.columns_ = order[: self.k].astype(int)
        self.n_features_in_ = X.shape[1]
        return self

    def transform(self, X: Any) -> NDArray[np.float64]:
        return np.asarray(X)[:, self.columns_]


class FeatureLadder(Ladder):
    """The number of predictors as the capacity: the model at count ``k`` uses the first k.

    Parameters
    ----------
    counts : iterable of int, default=range(1, 21)
        Numbers of predictors to use (0 means the mean only). Counts above the number of columns
        of X are refused when the sweep starts.
    order : sequence of int or str, optional
        The order in which predictors enter: column positions, or column names when X is a
        DataFrame. Default: the column order of X.
    estimator : scikit-learn regressor, optional
        The model fitted on the chosen columns. Default: ordinary least squares with an intercept
        (``LinearRegression()``), which the exact engine serves.

    Examples
    --------
    >>> import complexity as cx
    >>> cx.FeatureLadder(counts=[1, 2, 3]).capacities
    (1, 2, 3)
    """

    capacity_name = "n_features"

    def __init__(
        self,
        counts: Iterable[int] = range(1, 21),
        order: Sequence[int] | Sequence[str] | None = None,
        estimator: Any = None,
    ) -> None:
        self.counts = _check_int_ladder("counts", counts, 0)
        if order is not None and (isinstance(order, (str, bytes)) or not isinstance(order, Iterable)):
            raise TypeError(
                f"order must be None or a list of column positions or names; got {_short_repr(order)}."
            )
        self.order = None if order is None else list(order)
        if estimator is not None and not hasattr(estimator, "fit"):
            raise TypeError(f"estimator must be a scikit-learn regressor; got {_short_repr(estimator)}.")
        self.estimator = estimator
        self.linear_least_squares = estimator is None

    @property
    def capacities(self) -> tuple[int, ...]:
        return self.counts

    def column_order(self, n_columns: int, feature_names: tuple[str, ...] | None) -> list[int]:
        """Resolve ``order`` into column positions for data with ``n_columns`` columns."""
        if self.order is None:
            return list(range(n_columns))
        positions = []
        for item in self.order:
            if isinstance(item, str):
                if feature_names is None or item not in feature_names:
                    known = list(feature_names) if feature_names else "none (X is not a DataFrame)"
                    raise ValueError(f"order names column {item!r}, which X does not have; columns: {known}.")
                positions.append(feature_names.index(item))
            elif isinstance(item, numbers.Integral) and not isinstance(item, bool):
                if not 0 <= item < n_columns:
                    raise ValueError(f"order contains column position {item}; X has columns 0..{n_columns - 1}.")
                positions.append(int(item))
            else:
                raise TypeError(f"order must hold column positions or names; got {_short_repr(item)}.")
        if len(set(positions)) != len(positions):
            raise ValueError(f"order names a column more than once: {self.order!r}.")
        return positions

    def check_data(self, X: NDArray[np.float64], feature_names: tuple[str, ...] | None) -> list[str]:
        order = self.column_order(X.shape[1], feature_names)
        top = max(self.counts)
        if top > len(order):
            raise ValueError(
                f"counts reach {top}, but only {len(order)} predictor(s) are available; "
                f"use counts up to {len(order)}."
            )
        if self.linear_least_squares and top + 1 > X.shape[0]:
            raise ValueError(
                f"counts reach {top}: least squares with an intercept needs at least {top + 1} rows, "
                f"X has {X.shape[0]}."
            )
        return []

    def _model(self, k: int, order: list[int]) -> Any:
        if k == 0:
            return DummyRegressor(strategy="mean")
        final = LinearRegression() if self.estimator is None else clone(self.estimator)
        return Pipeline([("columns", _FirstColumns(k=k, order=order)), ("model", final)])

    def build(self, X: NDArray[np.float64], feature_names: tuple[str, ...] | None = None) -> list[Any]:
        order = self.column_order(X.shape[1], feature_names)
        return [self._model(k, order) for k in self.counts]

    def describe(self) -> dict[str, Any]:
        return {
            "kind": "features",
            "counts": list(self.counts),
            "order": self.order,
            "estimator": None if self.estimator is None else repr(self.estimator),
        }


def _sort_key(value: Any) -> tuple[int, Any]:
    # None means "no limit" for parameters such as max_depth: the most complex end.
    return (1, 0) if value is None else (0, value)


class ParamLadder(Ladder):
    """Any scikit-learn estimator, with one of its parameters as the capacity knob.

    Parameters
    ----------
    estimator : scikit-learn regressor
        The model; it is cloned, never fitted in place.
    param : str
        The parameter to vary, as accepted by ``estimator.set_params`` (nested names such as
        ``"splinetransformer__n_knots"`` work for pipelines).
    values : sequence
        The parameter values to sweep.
    simpler : {"low", "high", "first"}, default="low"
        Which end of ``values`` gives the simpler model. ``"low"``: small values are simpler (tree
        depth, number of knots); ``"high"``: large values are simpler (``n_neighbors``, ridge
        ``alpha``); ``"first"``: ``values`` are already listed simplest first. ``None`` sorts as
        the largest value (no limit).

    Examples
    --------
    >>> import complexity as cx
    >>> from sklearn.neighbors import KNeighborsRegressor
    >>> ladder = cx.ParamLadder(KNeighborsRegressor(), "n_neighbors", [1, 5, 20], simpler="high")
    >>> ladder.capacities
    (20, 5, 1)
    """

    def __init__(
        self, estimator: Any, param: str, values: Sequence[Any], simpler: str = "low"
    ) -> None:
        if not hasattr(estimator, "fit") or not hasattr(estimator, "get_params"):
            raise TypeError(
                f"estimator must be a scikit-learn estimator (with fit and get_params); "
                f"got {_short_repr(estimator)}."
            )
        if not isinstance(param, str):
            raise TypeError(f"param must be a parameter name (str); got {_short_repr(param)}.")
        known = estimator.get_params(deep=True)
        if param not in known:
            names = sorted(known)
            raise ValueError(
                f"param={param!r} is not a parameter of {type(estimator).__name__}; "
                f"accepted: {names[:30]}{' ...' if len(names) > 30 else ''}."
            )
        values = _check_capacity_list("values", values)
        check_option("simpler", simpler, ("low", "high", "first"))
        seen: list[Any] = []
        for v in values:
            if any(v is s or (type(v) is type(s) and v == s) for s in seen):
                raise ValueError(f"values contains {v!r} more than once; give each value once.")
            seen.append(v)
        if simpler != "first":
            try:
                values = sorted(values, key=_sort_key, reverse=simpler == "high")
            except TypeError:
                raise TypeError(
                    f"values {_short_repr(values)} cannot be ordered; list them simplest first and "
                    "pass simpler='first'."
                ) from None
        self.estimator = estimator
        self.param = param
        self.values = tuple(values)
        self.simpler = simpler
        self.capacity_name = param

    @property
    def capacities(self) -> tuple[Any, ...]:
        return self.values

    def build(self, X: NDArray[np.float64], feature_names: tuple[str, ...] | None = None) -> list[Any]:
        return [clone(self.estimator).set_params(**{self.param: v}) for v in self.values]

    def describe(self) -> dict[str, Any]:
        return {
            "kind": "parameter",
            "estimator": repr(self.estimator),
            "param": self.param,
            "values": list(self.values),
            "simpler": self.simpler,
        }


def capacity_label(ladder: Ladder) -> str:
    """A plain-words label for the capacity axis."""
    return {"degree": "polynomial degree", "n_features": "number of predictors"}.get(
        ladder.capacity_name, ladder.capacity_name
    )
