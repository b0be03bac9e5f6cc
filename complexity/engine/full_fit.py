"""The exact engine's fit on all the data: criteria, warnings and coefficient tables.

Every capacity is fitted once on all rows from one QR (:mod:`complexity.lstsq.nested`); the
closed-form criteria come from :func:`complexity.criteria.criteria_table`, and the coefficient
tables in the user's units are made per capacity on first access, through the one route of
:func:`complexity.lstsq.coefficients.user_coefficients` (bounded: a polynomial whose power basis
is meaningless in float64 gets a message in its table's place, not minutes of exact arithmetic).

With sample weights w the fit is weighted least squares, done as ordinary least squares on the
rows with w_i > 0 scaled by sqrt(w_i) (zero-weight rows take no part in the fit but get fitted
values); the weights are first scaled to mean 1 over those rows, which leaves the fit as it is and
keeps the criteria in the units of y^2 whatever the weights' scale. Everything the fit implies
then follows the scaled problem: the leverage is the weighted
hat diagonal h_ii = w_i z_i^T (Z^T W Z)^{-1} z_i, the criteria are the usual weighted forms
(weighted RSS, weighted PRESS sum_i w_i (e_i / (1 - h_ii))^2, n the rows of positive weight;
AIC and BIC leave out the term -sum_i log w_i of the weighted Gaussian likelihood, the same at
every capacity), and the coefficient tables carry the weighted-least-squares standard errors
(noise variance sigma^2 / w_i). Only the training error stays the plain mean of squared
residuals over every row, as the generic engine scores it.
"""

from __future__ import annotations

import warnings
from collections.abc import Iterator, Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from .._contract import FullFit, Problem
from .._validation import row_groups
from ..criteria import criteria_table
from ..exceptions import CapacityWarning
from ..lstsq.coefficients import user_coefficients
from ..lstsq.design import NestedDesign, PolynomialDesign
from ..lstsq.nested import NestedFit, nested_least_squares
from ._dispatch import single_blas
from ._exact_problem import capacity_label, design_of, not_served, rank_message

__all__ = ["fit_full", "variance_leverage"]


def _feature_names(problem: Problem, p: int) -> list[str]:
    names = problem.feature_names
    if names and len(names) == p:
        return [str(v) for v in names]
    return ["x"] if p == 1 else [f"x{j}" for j in range(p)]


class _CoefficientTables(Mapping[Any, pd.DataFrame]):
    """Capacity -> coefficient table in the user's units, each made on first access and kept.

    The exact conversion of a polynomial costs more the higher its degree, so a table is built
    only when asked for, through :func:`~complexity.lstsq.coefficients.user_coefficients`. Where
    that route refuses (power basis meaningless in float64), asking raises ``ValueError`` with
    the reason. Holds the data and small per-capacity arrays (never the fit's n x capacities
    columns) and pickles like any plain object.
    """

    def __init__(
        self,
        problem: Problem,
        design: NestedDesign,
        fit: NestedFit,
        position: dict[Any, int],
        rows: _Rows,
    ) -> None:
        assert problem.X is not None and problem.y is not None
        self._design, self._position = design, position
        self._X, self._y, self._w = problem.X[rows.keep], problem.y[rows.keep], rows.weight
        self._parts = {c: fit.capacity(c) for c in position.values()}
        self._names = _feature_names(problem, problem.X.shape[1])
        self._what = {c: capacity_label(problem, c) for c in position.values()}
        self._made: dict[Any, pd.DataFrame] = {}

    def __getitem__(self, capacity: Any) -> pd.DataFrame:
        if capacity not in self._made:
            if capacity not in self._position:
                raise KeyError(capacity)
            self._made[capacity] = self._table(self._position[capacity])
        return self._made[capacity]

    def __iter__(self) -> Iterator[Any]:
        return iter(self._position)

    def __len__(self) -> int:
        return len(self._position)

    def _table(self, c: int) -> pd.DataFrame:
        part = self._parts[c]
        try:
            got = user_coefficients(self._design, part, self._X, self._y, self._w)
        except ValueError as exc:
            raise ValueError(f"{self._what[c]}: {exc}") from None
        k = part.n_columns
        out = pd.DataFrame(
            {"estimate": got.coef, "std_error": got.coef_sd},
            index=pd.Index(self._design.labels(self._names, k), name="term"),
        )
        if not np.isfinite(part.sigma2):
            out.attrs["note"] = (
                "no residual degrees of freedom (as many coefficients as observations): "
                "standard errors are undefined"
            )
        return out


def _coefficient_tables(
    problem: Problem, design: NestedDesign, fit: NestedFit, failed: set[int], rows: _Rows
) -> Mapping[Any, pd.DataFrame]:
    """Coefficient tables in the user's units (each made when first asked for)."""
    position = {cap: c for c, cap in enumerate(problem.ladder.capacities) if c not in failed}
    return _CoefficientTables(problem, design, fit, position, rows)


@dataclass(frozen=True)
class _Rows:
    """The rows a full-data fit is made on, and their weights (None: every row, unweighted)."""

    keep: NDArray[np.intp] | slice  # rows of positive weight (all rows without weights)
    weight: NDArray[np.float64] | None  # their weights
    root: NDArray[np.float64] | None  # sqrt(weight), the scaling of rows and response


def _rows(problem: Problem) -> _Rows:
    w = problem.sample_weight
    if w is None:
        return _Rows(slice(None), None, None)
    keep = np.flatnonzero(w > 0)
    # scaled to mean 1 over the rows kept: the fit does not change, and the criteria keep the
    # units of y^2 whatever the scale of the weights (a weighted PRESS comparable to test_mse)
    unit = w[keep] / np.mean(w[keep])
    return _Rows(keep, unit, np.sqrt(unit))


def fit_full(problem: Problem) -> FullFit:
    """Fit every capacity once on all the data, from one QR; add criteria and coefficients.

    Parameters
    ----------
    problem : complexity.engine.Problem
        A data problem (not a Simulation) this engine :func:`supports`.

    Returns
    -------
    complexity.engine.FullFit
        ``fitted`` (n, C), ``train_mse`` (C,), ``failures`` (capacities whose full-data design is
        numerically rank deficient: a failure, never a minimum-norm fit), ``criteria``
        (:func:`complexity.criteria.criteria_table` columns ``loocv, gcv, aic, aicc, bic, cp,
        fixed_design_variance``, with the exact-fit guard on: an RSS at rounding level counts
        as zero, METHODS.md §6 and :func:`complexity.criteria.rounding_level_rss`),
        ``diagnostics`` (``condition_number`` of each design, ``max_abs_coefficient`` on the
        stable basis, ``n_params``, ``exact_fit``), ``coefficients`` (per capacity, in the
        user's units: power basis for polynomials) and ``notes`` (one line when some capacity
        fits the data exactly).

    Examples
    --------
    >>> import numpy as np
    >>> import complexity as cx
    >>> from complexity.engine import Problem
    >>> X = np.arange(5.0)[:, None]; y = np.array([1.0, 3, 2, 5, 4])
    >>> ladder = cx.PolynomialLadder(range(0, 3))
    >>> problem = Problem(ladder, ladder.build(X), X, y, X, y, cx.Bootstrap(5),
    ...                   np.random.SeedSequence(0), X)
    >>> full = fit_full(problem)
    >>> full.criteria.loc[1, ["gcv", "aic"]].round(6).tolist()
    [2.0, 16.546865]
    >>> full.coefficients[1]["estimate"].round(6).tolist()
    [1.4, 0.8]
    """
    if problem.X is None or problem.y is None:
        raise ValueError("fit_full needs observed data (problem.X and problem.y); got None.")
    # tiny BLAS calls on several threads mostly wait for each other: one thread is faster here
    with single_blas():
        return _fit_full(problem)


def _fit_full(problem: Problem) -> FullFit:
    design = design_of(problem)
    if design is None:
        raise ValueError(not_served(problem))
    X, y = problem.X, problem.y
    assert X is not None and y is not None
    n = X.shape[0]
    rows = _rows(problem)
    Z = design.transform(X)
    if rows.root is None:
        y_fit = y
        fit = nested_least_squares(Z, y, n_columns_per_capacity=design.n_columns)
        fitted = fit.fitted.T.copy()
        leverage = fit.leverage
    else:
        # weighted least squares as OLS on sqrt(w)-scaled rows of positive weight (zero-weight
        # rows take no part); statsmodels' WLS whitens the same way
        y_fit = rows.root * y[rows.keep]
        Z_fit = rows.root[:, None] * Z[rows.keep]
        if Z_fit.shape[0] < design.n_design:
            raise ValueError(
                f"sample_weight leaves {Z_fit.shape[0]} row(s) of positive weight, fewer than the "
                f"{design.n_design} coefficients of the largest {problem.ladder.capacity_name}; "
                "give more rows a positive weight or drop the largest capacities."
            )
        fit = nested_least_squares(Z_fit, y_fit, n_columns_per_capacity=design.n_columns)
        fitted = Z @ fit.coef.T  # every row, zero-weight ones too
        leverage = np.zeros((fit.n_capacities, n))
        leverage[:, rows.keep] = fit.leverage  # w_i z_i'(Z'WZ)^-1 z_i; 0 where w_i = 0
    caps = list(problem.ladder.capacities)
    C = len(caps)
    failures = {c: rank_message(problem, c, "full-data") for c in range(C) if fit.rank_deficient[c]}
    ok = np.array([c not in failures for c in range(C)])
    fitted[:, ~ok] = np.nan
    if rows.root is None:
        train_mse = np.where(ok, fit.rss / n, np.nan)
    else:  # the generic engine's training error: plain mean over every row
        train_mse = np.where(ok, np.mean((fitted - y[:, None]) ** 2, axis=0), np.nan)

    columns = ["loocv", "gcv", "aic", "aicc", "bic", "cp", "fixed_design_variance"]
    criteria = pd.DataFrame(
        np.nan, index=pd.Index(caps, name=problem.ladder.capacity_name), columns=columns
    )
    exact = np.zeros(C, dtype=bool)
    notes: list[str] = []
    if ok.any():
        args = (fit.fitted_residuals[ok], fit.leverage[ok], fit.rank[ok])
        # y and the condition numbers turn on the exact-fit guard (criteria.rounding_level_rss)
        guard = {"rss": fit.rss[ok], "y": y_fit, "condition": fit.condition[ok]}
        try:
            table = criteria_table(*args, **guard)
        except ValueError as exc:  # no model leaves a usable noise estimate for Cp
            table = criteria_table(*args, **guard, sigma2=1.0)
            table[["cp", "fixed_design_variance"]] = np.nan
            warnings.warn(
                f"Mallows' Cp and the fixed-design variance are left empty: {exc}",
                CapacityWarning,
                stacklevel=3,
            )
        criteria.loc[np.asarray(caps, dtype=object)[ok], columns] = table[columns].to_numpy()
        exact[ok] = table["exact_fit"].to_numpy()
        if exact.any():
            notes.append(_exact_fit_note(problem, exact, ok, table, y_fit))

    diagnostics = pd.DataFrame(
        {
            "condition_number": fit.condition,
            "max_abs_coefficient": np.where(ok, np.max(np.abs(fit.coef), axis=1), np.nan),
            "n_params": fit.rank,
            "exact_fit": exact,
        },
        index=pd.Index(caps, name=problem.ladder.capacity_name),
    )
    distinct = int(row_groups(X[rows.keep])[1].size)
    if not isinstance(design, PolynomialDesign):  # a polynomial ladder says it up front
        full_caps = [caps[c] for c in range(C) if design.n_columns[c] >= distinct]
        if full_caps:
            warnings.warn(
                f"{problem.ladder.capacity_name} {full_caps} use(s) as many coefficients as there "
                f"are distinct rows ({distinct}): the fit interpolates and its training error "
                "says nothing.",
                CapacityWarning,
                stacklevel=3,
            )
    return FullFit(
        fitted=fitted,
        train_mse=train_mse,
        failures=failures,
        criteria=criteria,
        diagnostics=diagnostics,
        coefficients=_coefficient_tables(problem, design, fit, set(failures), rows),
        leverage=np.where(ok[:, None], leverage, np.nan),
        notes=notes,
    )


def variance_leverage(problem: Problem) -> NDArray[np.float64]:
    """The leverage ``h`` whose ``h / (1 - h)`` is each row's out-of-sample variance factor.

    The decomposition (:func:`complexity.decompose.curves_table`) takes the variance of the fit
    without row i at x_i as ``sigma^2 h_i / (1 - h_i)``, with sigma^2 the (unweighted) noise
    variance. That holds for ordinary least squares with h the hat diagonal. A weighted fit
    under the same noise has, by Sherman-Morrison on M = Z'WZ less row i (N = Z'W^2 Z,
    ``h_i = w_i z_i' M^-1 z_i``, ``a_i = z_i' M^-1 N M^-1 z_i``),

        Var = sigma^2 q_i,   q_i = (a_i - h_i^2) / (1 - h_i)^2,

    which is ``h_i / (1 - h_i)`` again when every w_i = 1 (then a_i = h_i). This returns
    ``q / (1 + q)``, the h with that factor: the hat diagonal for unweighted problems, so the
    decomposition is the same code for both. Shape (n_capacities, n); NaN rows where the
    full-data fit failed; 1 where a row is interpolated (q infinite).

    Examples
    --------
    >>> import numpy as np
    >>> import complexity as cx
    >>> from complexity.engine import Problem
    >>> X = np.arange(6.0)[:, None]; y = np.array([1.0, 3, 2, 5, 4, 6])
    >>> ladder = cx.PolynomialLadder(range(0, 2))
    >>> def problem(w):
    ...     return Problem(ladder, ladder.build(X), X, y, X, y, cx.Bootstrap(5),
    ...                    np.random.SeedSequence(0), X, sample_weight=w)
    >>> bool(np.allclose(variance_leverage(problem(np.ones(6))), fit_full(problem(None)).leverage))
    True
    """
    rows = _rows(problem)
    if rows.root is None:
        full = fit_full(problem)
        assert full.leverage is not None
        return full.leverage
    design = design_of(problem)
    if design is None or problem.X is None:
        raise ValueError(not_served(problem))
    Z = design.transform(problem.X)
    # the fit's factor F_k = R_k^{-1} of the scaled rows: U = Z F_k has z_i' M^-1 z_j = u_i . u_j
    with single_blas():
        Zs = rows.root[:, None] * Z[rows.keep]
        fit = nested_least_squares(
            Zs, np.zeros(Zs.shape[0]), n_columns_per_capacity=design.n_columns
        )
        w = np.zeros(Z.shape[0])
        w[rows.keep] = rows.weight
        out = np.full((len(design.n_columns), Z.shape[0]), np.nan)
        for c, k in enumerate(design.n_columns):
            if fit.rank_deficient[c]:  # a failure of the full-data fit (fit_full)
                continue
            U = Z[:, :k] @ fit.cov_factor[c, :k, :k]
            B = (U * (w**2)[:, None]).T @ U  # F' N F
            a = np.sum((U @ B) * U, axis=1)
            h = w * np.sum(U**2, axis=1)
            with np.errstate(divide="ignore", invalid="ignore"):
                q = (a - h**2) / (1.0 - h) ** 2
                out[c] = np.where(h < 1.0 - 1e-10, q / (1.0 + q), 1.0)
    return out


def _exact_fit_note(
    problem: Problem,
    exact: NDArray[np.bool_],
    ok: NDArray[np.bool_],
    table: Any,
    y: NDArray[np.float64],
) -> str:
    """One line for the notes: which capacities fit the data to rounding level (RSS counted 0)."""
    caps = list(problem.ladder.capacities)
    name = problem.ladder.capacity_name
    where = np.flatnonzero(exact)
    first = caps[where[0]]
    usable = np.flatnonzero(ok)
    if np.array_equal(where, usable[usable >= where[0]]):
        span = f"from {name} {first} on"
    else:
        span = f"at {name} {', '.join(str(caps[c]) for c in where)}"
    level = np.asarray(table.attrs["rounding_level_rss"])[np.asarray(table["exact_fit"])]
    scale = float(np.sum(y**2))
    size = (
        f"<= {float(np.max(level)) / scale:.1g} of the data's sum of squares"
        if scale > 0
        else "y is all zeros"
    )
    return (
        f"RSS is at rounding level {span} ({size}): the data fit exactly; the closed-form "
        f"criteria count that RSS as zero and pick the simplest such {name}, {first}."
    )
