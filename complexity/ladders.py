"""Ladders: ordered families of models of growing capacity.

A ladder knows its capacity values (ordered from the simplest model to the most complex one) and
how to build an unfitted scikit-learn estimator at each of them. The sweep fits those estimators on
every resampled training set; least-squares ladders are also served by the exact engine.
"""

from __future__ import annotations

import numbers
from collections.abc import Callable, Iterable, Sequence
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import NDArray
from sklearn.base import clone
from sklearn.dummy import DummyRegressor
from sklearn.linear_model import LinearRegression
from sklearn.pipeline import Pipeline

from ._params import ParamsMixin
from ._ranking import RANKINGS, FirstColumns, callable_name, ranking
from ._validation import _short_repr, check_option, repr_from_description, row_groups
from .basis import LegendreFeatures, PolynomialBasis, n_total_degree_terms
from .lstsq.design import FeatureDesign, NestedDesign, PolynomialDesign

__all__ = ["FeatureLadder", "Ladder", "ParamLadder", "PolynomialLadder"]


class Ladder(ParamsMixin):
    """Base class of all ladders (not used directly).

    Subclasses set :attr:`capacities` (simplest first) and :attr:`capacity_name`, and implement
    :meth:`build`, which returns one unfitted estimator per capacity for the given data.
    """

    capacity_name: str = "capacity"

    @property
    def capacities(self) -> tuple[Any, ...]:
        raise NotImplementedError

    def check_data(
        self, X: NDArray[np.float64], feature_names: tuple[str, ...] | None
    ) -> list[str]:
        """Check that the data can support every capacity; return warnings (strings).

        Raises ``ValueError`` when a capacity cannot be fitted at all on the full data.
        """
        return []

    def build(
        self, X: NDArray[np.float64], feature_names: tuple[str, ...] | None = None
    ) -> list[Any]:
        """Return one unfitted estimator per capacity, with any data-derived settings fixed from X."""
        raise NotImplementedError

    def training_shortfall(self, index: int, X_train: NDArray[np.float64]) -> str | None:
        """Return why capacity ``index`` cannot be fitted on ``X_train``, or None if it can."""
        return None

    def nested_design(
        self, X: NDArray[np.float64], feature_names: tuple[str, ...] | None = None
    ) -> NestedDesign | None:
        """The least-squares design every capacity shares, fixed from ``X``; None if there is none.

        A ladder whose every model is ordinary least squares on a leading block of one design's
        columns returns that design (:class:`~complexity.lstsq.design.NestedDesign`), and the
        exact engine and the closed-form criteria serve it; None means the generic engine fits
        the models :meth:`build` returns.
        """
        return None

    def describe(self) -> dict[str, Any]:
        """A JSON-friendly description, stored with every result."""
        raise NotImplementedError

    def __repr__(self) -> str:
        return repr_from_description(self)


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


def _distinct_rows(X: NDArray[np.float64]) -> int:
    return int(row_groups(X)[1].size)


def _highest_degree_text(n_features: int, n_rows: int, distinct: int) -> str:
    """Plain words for the highest total degree ``distinct`` points can determine."""
    best = 0
    while n_total_degree_terms(n_features, best + 1) <= distinct:
        best += 1
    what = "x values" if n_features == 1 else "rows"
    return f"Degrees up to {best} can be fitted to {n_rows} rows with {distinct} distinct {what}."


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

    def __init__(
        self, degrees: Iterable[int] = range(0, 13), domain: tuple[float, float] | None = None
    ) -> None:
        self.degrees = _check_int_ladder("degrees", degrees, 0)
        if domain is not None:
            try:
                lo, hi = (float(domain[0]), float(domain[1]))
            except (TypeError, ValueError, IndexError):
                raise TypeError(
                    f"domain must be a (low, high) pair of numbers; got {_short_repr(domain)}."
                ) from None
            if not (np.isfinite(lo) and np.isfinite(hi) and hi > lo):
                raise ValueError(
                    f"domain must be a finite interval with low < high; got {domain!r}."
                )
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

    def check_data(
        self, X: NDArray[np.float64], feature_names: tuple[str, ...] | None
    ) -> list[str]:
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
        need = n_total_degree_terms(X.shape[1], top)
        if need > distinct:
            raise ValueError(
                f"degrees reach {top}, which needs {need} coefficients, but X has only {distinct} "
                f"distinct {'x values' if X.shape[1] == 1 else 'rows'}. "
                + _highest_degree_text(X.shape[1], X.shape[0], distinct)
            )
        warnings = []
        if need == distinct:
            warnings.append(
                f"degree {top} has as many coefficients as there are distinct x values ({distinct}): "
                "it interpolates the data, so its training error is zero and says nothing."
            )
        return warnings

    def build(
        self, X: NDArray[np.float64], feature_names: tuple[str, ...] | None = None
    ) -> list[Any]:

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

    def nested_design(
        self, X: NDArray[np.float64], feature_names: tuple[str, ...] | None = None
    ) -> PolynomialDesign:
        """The graded Legendre basis on the domain :meth:`build` uses, one column block per degree.

        Examples
        --------
        >>> import numpy as np
        >>> import complexity as cx
        >>> cx.PolynomialLadder([0, 2]).nested_design(np.linspace(0, 1, 5)[:, None]).n_columns
        (1, 3)
        """
        basis = PolynomialBasis(max(self.degrees), self._domain_for(X)).fit(X)
        return PolynomialDesign(basis, tuple(basis.n_columns(d) for d in self.degrees))

    def training_shortfall(self, index: int, X_train: NDArray[np.float64]) -> str | None:
        need = n_total_degree_terms(X_train.shape[1], self.degrees[index])
        have = _distinct_rows(X_train)
        if have < need:
            return (
                f"training set has {have} distinct x value(s); degree {self.degrees[index]} "
                f"needs {need}"
            )
        return None

    def describe(self) -> dict[str, Any]:
        return {"kind": "polynomial", "degrees": list(self.degrees), "domain": self.domain}


class FeatureLadder(Ladder):
    """The number of predictors as the capacity: the model at count ``k`` uses the first k.

    The order in which predictors enter is either fixed (given, or the column order of X) or
    *ranked*: recomputed from the training rows of every resample only, never from all the data.
    Ranking on all the data and then resampling only the final fit lets the held-out rows choose
    the predictors, and the error estimate becomes optimistic even when y is unrelated to X
    (Ambroise & McLachlan 2002; see METHODS.md §11).

    Parameters
    ----------
    counts : iterable of int, default=range(1, 21)
        Numbers of predictors to use (0 means the mean only). Counts above the number of columns
        of X are refused when the sweep starts.
    order : None, sequence of int or str, {"correlation", "f-test"} or callable, optional
        The order in which predictors enter.

        - None: the column order of X.
        - A sequence: column positions, or column names when X is a DataFrame.
        - ``"correlation"``: ranked by absolute Pearson correlation with y.
        - ``"f-test"``: forward selection by the partial F statistic (F-to-enter): each step adds
          the predictor that most reduces the residual sum of squares of least squares on the
          predictors already in (with an intercept). Its first step is the univariate F test,
          which ranks exactly like ``"correlation"``.
        - A callable ``order(X_train, y_train) -> positions``: column positions, best first, at
          least ``max(counts)`` of them (e.g. ``np.argsort(-scores)``). It receives the training
          rows of one resample as float arrays (bootstrap repeats included) and must not modify
          them.

        Ranked orders are recomputed on every training set (also in the fit on all the data), so
        the ladder runs on the generic engine; ``result.inclusion`` reports how often each
        predictor was among the first k. The ranking ignores ``sample_weight``.
    estimator : scikit-learn regressor, optional
        The model fitted on the chosen columns. Default: ordinary least squares with an intercept
        (``LinearRegression()``), which the exact engine serves for a fixed order.

    Examples
    --------
    >>> import complexity as cx
    >>> cx.FeatureLadder(counts=[1, 2, 3]).capacities
    (1, 2, 3)
    >>> X = np.arange(12.0).reshape(6, 2) ** [1, 2]
    >>> cx.FeatureLadder(counts=[1, 2], order="correlation").nested_design(X) is None
    True

    Ranked inside every training set, with how often each predictor made the first k:

    >>> from sklearn.datasets import load_diabetes
    >>> X, y = load_diabetes(return_X_y=True, as_frame=True)
    >>> result = cx.sweep(cx.FeatureLadder([1, 2, 3], order="f-test"), X, y,
    ...                   plan=cx.CrossValidation(5), random_state=0)
    >>> result.inclusion.loc[1].idxmax()
    'bmi'
    """

    capacity_name = "n_features"

    def __init__(
        self,
        counts: Iterable[int] = range(1, 21),
        order: Sequence[int] | Sequence[str] | str | Callable[..., Any] | None = None,
        estimator: Any = None,
    ) -> None:
        self.counts = _check_int_ladder("counts", counts, 0)
        if isinstance(order, str):
            check_option("order", order, RANKINGS)
        elif callable(order) or order is None:
            pass
        elif isinstance(order, bytes) or not isinstance(order, Iterable):
            raise TypeError(
                "order must be None, a list of column positions or names, 'correlation', 'f-test' "
                f"or a callable (X_train, y_train) -> positions; got {_short_repr(order)}."
            )
        else:
            order = list(order)  # type: ignore[assignment]  # positions or names, checked later
        self.order = order
        if estimator is not None and not hasattr(estimator, "fit"):
            raise TypeError(
                f"estimator must be a scikit-learn regressor; got {_short_repr(estimator)}."
            )
        self.estimator = estimator

    @property
    def ranked(self) -> bool:
        """True when the order is recomputed inside every training set."""
        return isinstance(self.order, str) or callable(self.order)

    @property
    def capacities(self) -> tuple[int, ...]:
        return self.counts

    def column_order(self, n_columns: int, feature_names: tuple[str, ...] | None) -> list[int]:
        """Resolve a fixed ``order`` into column positions for data with ``n_columns`` columns.

        A ranked order has no fixed column order; it raises ``ValueError``.
        """
        if self.ranked:
            raise ValueError(
                f"order={self.order!r} is ranked inside every training set; it has no fixed "
                "column order."
            )
        if self.order is None:
            return list(range(n_columns))
        positions = []
        assert not callable(self.order) and not isinstance(self.order, str)  # not ranked
        for item in self.order:
            if isinstance(item, str):
                if feature_names is None or item not in feature_names:
                    known = list(feature_names) if feature_names else "none (X is not a DataFrame)"
                    raise ValueError(
                        f"order names column {item!r}, which X does not have; columns: {known}."
                    )
                positions.append(feature_names.index(item))
            elif isinstance(item, numbers.Integral) and not isinstance(item, bool):
                if not 0 <= int(item) < n_columns:
                    raise ValueError(
                        f"order contains column position {item}; X has columns 0..{n_columns - 1}."
                    )
                positions.append(int(item))
            else:
                raise TypeError(
                    f"order must hold column positions or names; got {_short_repr(item)}."
                )
        if len(set(positions)) != len(positions):
            raise ValueError(f"order names a column more than once: {self.order!r}.")
        return positions

    def check_data(
        self, X: NDArray[np.float64], feature_names: tuple[str, ...] | None
    ) -> list[str]:
        available = X.shape[1] if self.ranked else len(self.column_order(X.shape[1], feature_names))
        top = max(self.counts)
        if top > available:
            raise ValueError(
                f"counts reach {top}, but only {available} predictor(s) are available; "
                f"use counts up to {available}."
            )
        if self.estimator is None and top + 1 > X.shape[0]:
            raise ValueError(
                f"counts reach {top}: least squares with an intercept needs at least {top + 1} "
                f"rows, X has {X.shape[0]}."
            )
        return []

    def _model(self, k: int, order: Any) -> Any:
        if k == 0:
            return DummyRegressor(strategy="mean")
        final = LinearRegression() if self.estimator is None else clone(self.estimator)
        return Pipeline([("columns", FirstColumns(k=k, order=order)), ("model", final)])

    def build(
        self, X: NDArray[np.float64], feature_names: tuple[str, ...] | None = None
    ) -> list[Any]:
        order = self.order if self.ranked else self.column_order(X.shape[1], feature_names)
        return [self._model(k, order) for k in self.counts]

    def nested_design(
        self, X: NDArray[np.float64], feature_names: tuple[str, ...] | None = None
    ) -> FeatureDesign | None:
        """Centred and scaled predictors in their fixed order; None for a ranked order or an
        estimator of the user's (the exact engine serves least squares on one fixed order; a
        ranked order changes with every training set and is fitted by the generic engine).

        Examples
        --------
        >>> import numpy as np
        >>> import complexity as cx
        >>> X = np.arange(12.0).reshape(6, 2) ** [1, 2]
        >>> cx.FeatureLadder([0, 1, 2], order=[1, 0]).nested_design(X).columns
        (1, 0)
        """
        if self.estimator is not None or self.ranked:
            return None
        order = self.column_order(X.shape[1], feature_names)
        columns = tuple(order[: max(self.counts)])
        n_columns = tuple(k + 1 for k in self.counts)
        # a column without spread stays zero in the design: reported as rank loss, not refused
        return FeatureDesign.from_data(X, columns, n_columns, fit_intercept=True, strict=False)

    def training_shortfall(self, index: int, X_train: NDArray[np.float64]) -> str | None:
        """Least squares on k predictors and an intercept needs k + 1 distinct training rows."""
        k = self.counts[index]
        if self.estimator is None and k > 0:
            have = X_train.shape[0]
            if have >= k + 1:
                have = _distinct_rows(X_train)
            if have < k + 1:
                return (
                    f"training set has {have} distinct row(s); least squares on {k} predictor(s) "
                    f"and an intercept needs {k + 1}"
                )
        return None

    def inclusion(
        self, problem: Any, resamples: Sequence[Any], feature_names: tuple[str, ...] | None = None
    ) -> pd.DataFrame:
        """Share of resamples in which each predictor was among the first k, for every count k.

        For a ranked order the ranking is recomputed on each resample's training rows (the same
        computation the models do inside their fit); a fixed order gives 1 for its first k
        predictors and 0 elsewhere.

        Parameters
        ----------
        problem : complexity.engine.Problem
            Supplies each resample's training set.
        resamples : sequence of complexity.plans.Resample
        feature_names : tuple of str, optional
            Column labels; default ``x0, x1, ...``.

        Returns
        -------
        pandas.DataFrame
            Indexed by count (``n_features``), one column per predictor, values in [0, 1].
        """
        p = problem.X_eval.shape[1]
        labels = list(feature_names) if feature_names else [f"x{j}" for j in range(p)]
        top = max(self.counts)
        hits = np.zeros((len(self.counts), p))
        if self.ranked:
            for r in resamples:
                X_tr, y_tr, _ = problem.training_set(r)
                rank = np.zeros(p, dtype=np.intp) + p  # position in the ranking; p = not ranked
                order = ranking(self.order, X_tr, y_tr, top)
                rank[order] = np.arange(order.size)
                hits += rank[None, :] < np.array(self.counts)[:, None]
            shares = hits / max(len(resamples), 1)
        else:
            fixed = self.column_order(p, feature_names)
            for i, k in enumerate(self.counts):
                hits[i, fixed[:k]] = 1.0
            shares = hits
        return pd.DataFrame(
            shares, index=pd.Index(list(self.counts), name=self.capacity_name), columns=labels
        )

    def describe(self) -> dict[str, Any]:
        order: Any = self.order
        if callable(order):
            order = f"callable {callable_name(order)}"
        return {
            "kind": "features",
            "counts": list(self.counts),
            "order": order,
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

    def build(
        self, X: NDArray[np.float64], feature_names: tuple[str, ...] | None = None
    ) -> list[Any]:
        return [clone(self.estimator).set_params(**{self.param: v}) for v in self.values]

    def describe(self) -> dict[str, Any]:
        return {
            "kind": "parameter",
            "estimator": repr(self.estimator),
            "param": self.param,
            "values": list(self.values),
            "simpler": self.simpler,
        }
