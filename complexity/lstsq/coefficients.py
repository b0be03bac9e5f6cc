"""Coefficients in the user's units: one route for every caller.

:func:`user_coefficients` is the only way a fitted capacity becomes coefficients on the raw
predictors (power basis for polynomials) with their standard deviations. The one-off fits
:func:`fit_polynomial` and :func:`fit_linear` and the coefficient tables a sweep hands out
(``SweepResult.coefficients``, built by :mod:`complexity.engine.full_fit`) all call it, so the
digits held against NIST StRD are the digits users get.

For polynomials the route adds one step of iterative refinement whose residual ``y - p(x)`` is
computed exactly in rational arithmetic (:mod:`complexity.lstsq._rational`), and the residual SD
comes from that exact residual. Both are bounded (:func:`user_units_problem`): past a degree
where the power basis cannot be used in float64 (or where the exact work would take minutes),
the route says so instead of converting.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .._validation import _short_repr
from ..basis import PolynomialBasis
from ._rational import exact_residuals
from .design import NestedDesign, PolynomialDesign, scaled_design
from .nested import CapacityFit, NestedFit, as_float_array, nested_least_squares

__all__ = [
    "UserCoefficients",
    "fit_linear",
    "fit_polynomial",
    "map_coefficients",
    "user_coefficients",
    "user_units_problem",
]

#: float64 keeps about 16 digits: a power basis amplifying rounding by more keeps none
_GROWTH_LIMIT = 1.0 / np.finfo(np.float64).eps
#: terms beyond which the exact conversion matrix (k x k big rationals) is not attempted
_MAX_EXACT_TERMS = 300
#: rows x terms beyond which the exact residual of the refinement step is skipped
_MAX_EXACT_ROW_TERMS = 200_000


@dataclass(frozen=True)
class UserCoefficients:
    """Coefficients of one fitted capacity in the user's units, with their standard deviations.

    Attributes
    ----------
    terms : list
        What each coefficient multiplies: exponent tuples for polynomials (``(0,)`` is the
        constant), or ``"intercept"`` / column positions for linear models.
    coef : ndarray of shape (k,)
        Estimates.
    coef_sd : ndarray of shape (k,)
        Standard deviations ``sqrt(diag(sigma2 (Z^T Z)^{-1}))`` mapped to these units (NaN
        without residual degrees of freedom).
    residual_sd : float
        ``sqrt(RSS / (n - p))`` (NaN without residual degrees of freedom).
    cov : ndarray of shape (k, k)
        Covariance of the estimates.

    Examples
    --------
    >>> import numpy as np
    >>> r = fit_polynomial(np.arange(5.0), [1, 3, 2, 5, 4], degree=1)
    >>> r.coef.round(6), round(r.residual_sd, 6)
    (array([1.4, 0.8]), 1.095445)
    """

    terms: list[Any]
    coef: NDArray[np.float64]
    coef_sd: NDArray[np.float64]
    residual_sd: float
    cov: NDArray[np.float64]


def map_coefficients(
    fit: NestedFit, index: int, to_user: NDArray[np.float64], terms: list[Any] | None = None
) -> UserCoefficients:
    """Map the coefficients of capacity ``index`` through a linear change of basis (no refinement).

    Parameters
    ----------
    fit : NestedFit
    index : int
        Position of the capacity in ``fit``.
    to_user : ndarray of shape (p, p)
        Matrix from design coefficients to user coefficients, ``p = fit.n_columns[index]``
        (:meth:`NestedDesign.to_user_matrix <complexity.lstsq.design.NestedDesign.to_user_matrix>`).
    terms : list, optional
        Labels of the user coefficients (default: positions).

    Returns
    -------
    UserCoefficients
        Standard deviations are row norms of ``to_user @ F`` times ``sqrt(sigma2)``: a sum of
        squares, so no cancellation in the last step.

    Examples
    --------
    >>> import numpy as np
    >>> fit = nested_least_squares(np.column_stack([np.ones(5), np.arange(5.0)]),
    ...                            [1, 3, 2, 5, 4], n_columns_per_capacity=[2])
    >>> map_coefficients(fit, 0, np.eye(2)).coef_sd.round(6)
    array([0.848528, 0.34641 ])
    """
    if isinstance(index, bool) or not isinstance(index, numbers.Integral):
        raise TypeError(f"index must be an int; got {_short_repr(index)}.")
    if not -fit.n_capacities <= index < fit.n_capacities:
        raise ValueError(f"index must lie in 0..{fit.n_capacities - 1}; got {index}.")
    part = fit.capacity(int(index))
    p = part.n_columns
    T = np.asarray(to_user, dtype=np.float64)
    if T.shape != (p, p):
        raise ValueError(f"to_user must have shape {(p, p)} for this capacity; got {T.shape}.")
    if not np.isfinite(part.sigma2):
        raise ValueError(
            f"capacity {index} leaves no residual degrees of freedom (n = p = {p}); "
            "standard deviations are undefined."
        )
    return _mapped(part, T, T @ part.coef, part.sigma2, terms)


def _mapped(
    part: CapacityFit,
    T: NDArray[np.float64],
    coef: NDArray[np.float64],
    sigma2: float,
    terms: list[Any] | None,
) -> UserCoefficients:
    M = T @ part.cov_factor
    return UserCoefficients(
        terms=list(range(part.n_columns)) if terms is None else list(terms),
        coef=coef,
        coef_sd=np.sqrt(sigma2) * np.sqrt(np.sum(M**2, axis=1)),
        residual_sd=float(np.sqrt(sigma2)),
        cov=sigma2 * (M @ M.T),
    )


def user_units_problem(design: NestedDesign, k: int) -> str | None:
    """Why the first ``k`` design columns cannot be reported in user units, or None.

    A polynomial's power-basis coefficients are refused when the change of basis would amplify
    rounding beyond what float64 holds (:meth:`PolynomialDesign.conversion_growth
    <complexity.lstsq.design.PolynomialDesign.conversion_growth>` above ``1 / eps``: summing the
    terms over the data range would keep no correct digit), or when there are more than 300
    terms (the exact conversion would take minutes). Linear models always convert.

    Examples
    --------
    >>> from complexity.basis import PolynomialBasis
    >>> d = PolynomialDesign(PolynomialBasis(60).fit([0.0, 1.0]), (61,))
    >>> print(user_units_problem(d, 61))  # doctest: +ELLIPSIS
    power-basis coefficients of this polynomial are not given: ... no digit would be left.
    >>> user_units_problem(d, 5) is None
    True
    """
    if not isinstance(design, PolynomialDesign):
        return None
    if k > _MAX_EXACT_TERMS:
        return (
            f"power-basis coefficients of this polynomial are not given: it has {k} terms, more "
            f"than the {_MAX_EXACT_TERMS} an exact conversion handles in reasonable time."
        )
    growth = design.conversion_growth(k)
    if growth > _GROWTH_LIMIT:
        size = "more than 1e308" if not np.isfinite(growth) else f"about 1e{math.log10(growth):.0f}"
        return (
            "power-basis coefficients of this polynomial are not given: over the data range "
            f"its terms would cancel by a factor of {size}, more than the 16 digits a float64 "
            "number holds, so no digit would be left."
        )
    return None


def user_coefficients(
    design: NestedDesign,
    part: CapacityFit,
    X: NDArray[np.float64],
    y: NDArray[np.float64],
    sample_weight: NDArray[np.float64] | None = None,
) -> UserCoefficients:
    """Coefficients of one fitted capacity in the user's units: the one route.

    Parameters
    ----------
    design : NestedDesign
        The design the capacity was fitted on.
    part : CapacityFit
        That capacity's fit (:meth:`NestedFit.capacity <complexity.lstsq.nested.NestedFit.capacity>`).
    X, y : ndarray
        The data it was fitted to (polynomials: for the exact refinement step).
    sample_weight : ndarray, optional
        Positive weights of a weighted fit (``part`` fitted to ``sqrt(w) Z`` and ``sqrt(w) y``):
        the refinement step is then a weighted fit of the exact residual and the residual SD
        ``sqrt(sum w r^2 / (n - p))``, as in weighted least squares.

    Returns
    -------
    UserCoefficients
        Linear models: the design coefficients mapped back. Polynomials: the exact power-basis
        conversion after one step of iterative refinement with an exactly computed residual
        (skipped when rows x terms exceed 200,000), and the residual SD from that residual.

    Raises
    ------
    ValueError
        When :func:`user_units_problem` gives a reason.

    Examples
    --------
    >>> import numpy as np
    >>> X = np.arange(5.0)[:, None]; y = np.array([1.0, 3, 2, 5, 4])
    >>> d = scaled_design(X)
    >>> fit = nested_least_squares(d.transform(X), y, n_columns_per_capacity=[2])
    >>> user_coefficients(d, fit.capacity(0), X, y).coef.round(6)
    array([1.4, 0.8])
    """
    k = part.n_columns
    reason = user_units_problem(design, k)
    if reason is not None:
        raise ValueError(reason)
    T = design.to_user_matrix(k)
    terms = design.terms(k)
    sigma2 = float(part.sigma2)
    if not isinstance(design, PolynomialDesign) or X.shape[0] * k > _MAX_EXACT_ROW_TERMS:
        return _mapped(part, T, T @ part.coef, sigma2, terms)
    basis = design.basis
    # one step of iterative refinement, the residual computed exactly (rational arithmetic)
    root = np.ones(X.shape[0]) if sample_weight is None else np.sqrt(sample_weight)
    resid = exact_residuals(X, y, basis.exact_monomials(part.coef))
    Zk = design.transform(X)[:, :k] * root[:, None]
    delta = nested_least_squares(Zk, root * resid, n_columns_per_capacity=[k]).coef[0]
    mono = basis.exact_monomials(part.coef, delta)
    if part.residual_dof > 0:
        resid = root * exact_residuals(X, y, mono)
        sigma2 = math.fsum(resid**2) / float(part.residual_dof)
    coef = np.array([float(mono[t]) for t in terms])
    return _mapped(part, T, coef, sigma2, terms)


def fit_polynomial(
    x: ArrayLike, y: ArrayLike, *, degree: int, domain: ArrayLike | None = None
) -> UserCoefficients:
    """Least-squares polynomial of one total degree, reported in the user's units.

    The fit is done on the Legendre basis of mapped x (:class:`~complexity.basis.PolynomialBasis`)
    and reported through :func:`user_coefficients`, the route a sweep's coefficient tables use.
    That costs O(n_samples x n_terms) big-rational operations: this function reports one fit.

    Parameters
    ----------
    x : array-like of shape (n_samples,) or (n_samples, n_features)
        Predictor(s).
    y : array-like of shape (n_samples,)
        Response.
    degree : int
        Total degree (>= 0).
    domain : array-like, optional
        Interval(s) mapped onto [-1, 1] (default: data range).

    Returns
    -------
    UserCoefficients
        ``terms`` are exponent tuples; with one predictor ``coef[j]`` multiplies ``x**j``.

    Examples
    --------
    >>> import numpy as np
    >>> x = np.linspace(1e6, 1e6 + 1, 6)
    >>> r = fit_polynomial(x - 1e6, (x - 1e6) ** 2 + 1.0, degree=2)
    >>> r.coef.round(8)
    array([1., 0., 1.])
    """
    basis = PolynomialBasis(degree, domain).fit(x)
    Xa = as_float_array(x, "x", 2)
    ya = as_float_array(y, "y", 1)
    P = basis.n_columns()
    design = PolynomialDesign(basis, (P,))
    fit = nested_least_squares(design.transform(Xa), ya, n_columns_per_capacity=[P])
    if fit.residual_dof[0] < 1:
        raise ValueError(
            f"degree {degree} needs {P} coefficients but there are only {Xa.shape[0]} "
            "observations; standard deviations need n > number of coefficients."
        )
    return user_coefficients(design, fit.capacity(0), Xa, ya)


def fit_linear(X: ArrayLike, y: ArrayLike, *, fit_intercept: bool = True) -> UserCoefficients:
    """Least-squares linear model on all predictors, reported in the user's units.

    The predictors are centred and scaled (:func:`~complexity.lstsq.design.scaled_design`)
    before the factorisation and mapped back through :func:`user_coefficients`.

    Parameters
    ----------
    X : array-like of shape (n_samples, n_features)
        Predictors.
    y : array-like of shape (n_samples,)
        Response.
    fit_intercept : bool, default=True
        Fit a constant term (reported first, labelled ``"intercept"``).

    Returns
    -------
    UserCoefficients

    Examples
    --------
    >>> r = fit_linear([[1.0], [2.0], [3.0], [4.0]], [2.0, 4.1, 5.9, 8.0], fit_intercept=False)
    >>> r.coef.round(6)
    array([1.996667])
    """
    design = scaled_design(X, fit_intercept=fit_intercept)
    Xa = as_float_array(X, "X", 2)
    ya = as_float_array(y, "y", 1)
    P = design.n_design
    fit = nested_least_squares(design.transform(Xa), ya, n_columns_per_capacity=[P])
    return user_coefficients(design, fit.capacity(0), Xa, ya)
