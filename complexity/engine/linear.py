"""Exact least-squares path: every capacity of a nested ladder from one factorisation.

Two layers live here:

- building blocks for one data set: :func:`nested_least_squares` (one QR, every capacity),
  :func:`scaled_design`, :func:`user_coefficients`, :func:`fit_polynomial`, :func:`fit_linear`;
- the engine ``sweep()`` uses for least-squares ladders (:func:`supports`, :func:`fit_full`,
  :func:`run`), which serves every resample of a plan from one basis (see the notes above
  :func:`supports`).

A nested ladder uses a leading block of the columns of one design ``Z`` at every capacity
(polynomial degree on the graded Legendre basis of :mod:`complexity.basis`, or the first k
predictors of a feature ladder). One Householder QR of the largest design, without column
pivoting (pivoting would reorder the columns and break the nesting), gives every smaller fit:

``Z[:, :k] = Q[:, :k] R[:k, :k]``, ``z = Q^T y`` (complete Q, applied without forming it),
``coef_k = R[:k, :k]^{-1} z[:k]``, ``RSS_k = sum_{j >= k} z_j^2`` (a tail sum, no cancellation),
``h_ii^(k) = sum_{j < k} Q_ij^2`` (a cumulative sum). See METHODS.md section 9.
"""

from __future__ import annotations

import functools
import itertools
import math
import numbers
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import scipy.linalg
from numpy.typing import ArrayLike, NDArray

from .._contract import FullFit, Outcome, Problem
from .._validation import row_groups
from ..accumulate import Tally, TallyBuilder, tally
from ..basis import PolynomialBasis, _exact_residuals
from ..exceptions import CapacityWarning

__all__ = [
    "NestedFit",
    "ScaledDesign",
    "UserCoefficients",
    "block_size",
    "fit_full",
    "fit_linear",
    "fit_polynomial",
    "nested_least_squares",
    "run",
    "run_tallies",
    "scaled_design",
    "supports",
    "user_coefficients",
]


def _short(value: Any, limit: int = 80) -> str:
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 3] + "..."


def _as_float_array(value: ArrayLike, name: str, ndim: int) -> NDArray[np.float64]:
    if value is None or isinstance(value, (str, bytes)):
        raise TypeError(f"{name} must be an array of numbers; got {_short(value)}.")
    raw = np.asarray(value)
    if raw.dtype.kind == "b" or raw.dtype.kind not in "iuf":
        raise TypeError(f"{name} must hold real numbers; got an array of dtype {raw.dtype}.")
    arr = np.array(raw, dtype=np.float64, copy=True)
    if ndim == 2 and arr.ndim == 1:
        arr = arr.reshape(-1, 1)
    if arr.ndim != ndim:
        raise ValueError(f"{name} must be {ndim}-D; got shape {arr.shape}.")
    if not np.isfinite(arr).all():
        raise ValueError(f"{name} contains NaN or infinite values; remove or impute them first.")
    return arr


# --------------------------------------------------------------------------------------------
# the nested fit
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class NestedFit:
    """Least-squares fits of every capacity of a nested ladder (one factorisation).

    Capacity ``k`` uses the first ``n_columns[k]`` columns of the design. Arrays with a capacity
    axis have it first.

    Attributes
    ----------
    n_samples : int
        Number of observations n.
    n_columns : tuple of int
        Columns of the design used at each capacity.
    rank : ndarray of int, shape (n_capacities,)
        Numerical rank of each capacity's design (equal to ``n_columns`` unless rank-deficient);
        this is the parameter count p_k of the criteria.
    rank_deficient : ndarray of bool, shape (n_capacities,)
        True where some ``|R_jj| < rank_tol * |R_00|``, j < n_columns[k]. Such a capacity is
        solved through an SVD of its triangular block with the numerical rank (minimum-norm
        coefficients, pseudo-inverse covariance), as statsmodels does.
    condition : ndarray of shape (n_capacities,)
        2-norm condition number of each capacity's design (of its R block).
    coef : ndarray of shape (n_capacities, n_columns_max)
        Coefficients on the design columns; zero past each capacity's own columns.
    fitted : ndarray of shape (n_capacities, n)
        Fitted values.
    residuals : ndarray of shape (n_capacities, n)
        ``y - fitted``.
    rss : ndarray of shape (n_capacities,)
        Residual sum of squares, as the tail sum of ``z = Q^T y``.
    leverage : ndarray of shape (n_capacities, n)
        Diagonal of each hat matrix.
    residual_dof : ndarray of int, shape (n_capacities,)
        ``n - rank``.
    sigma2 : ndarray of shape (n_capacities,)
        ``rss / residual_dof``; NaN where ``residual_dof == 0`` (no residual degrees of freedom:
        the noise variance cannot be estimated from that fit).
    cov_factor : ndarray of shape (n_capacities, n_columns_max, n_columns_max)
        ``F_k`` with coefficient covariance ``sigma2_k F_k F_k^T`` (``F_k = R_k^{-1}`` padded
        with zeros, or the pseudo-inverse factor when rank-deficient).
    r_diag : ndarray of shape (n_columns_max,)
        Diagonal of R (signs as LAPACK returns them).

    Examples
    --------
    >>> import numpy as np
    >>> x = np.arange(5.0)
    >>> Z = np.column_stack([np.ones(5), x, x**2])
    >>> fit = nested_least_squares(Z, [1, 3, 2, 5, 4], n_columns_per_capacity=[1, 2, 3])
    >>> np.round(fit.rss, 6)
    array([10.      ,  3.6     ,  3.314286])
    """

    n_samples: int
    n_columns: tuple[int, ...]
    rank: NDArray[np.intp]
    rank_deficient: NDArray[np.bool_]
    condition: NDArray[np.float64]
    coef: NDArray[np.float64]
    fitted: NDArray[np.float64]
    residuals: NDArray[np.float64]
    rss: NDArray[np.float64]
    leverage: NDArray[np.float64]
    residual_dof: NDArray[np.intp]
    sigma2: NDArray[np.float64]
    cov_factor: NDArray[np.float64]
    r_diag: NDArray[np.float64]

    @property
    def n_capacities(self) -> int:
        """Number of capacities."""
        return len(self.n_columns)

    @property
    def cov(self) -> NDArray[np.float64]:
        """Coefficient covariance ``sigma2_k F_k F_k^T``, shape (n_capacities, P, P).

        NaN for capacities without residual degrees of freedom (see :attr:`sigma2`).
        """
        ff = np.einsum("kij,klj->kil", self.cov_factor, self.cov_factor)
        return self.sigma2[:, None, None] * ff


def _check_capacity_columns(n_columns_per_capacity: Any, n_design: int) -> tuple[int, ...]:
    if isinstance(n_columns_per_capacity, (str, bytes)) or not isinstance(
        n_columns_per_capacity, (Sequence, np.ndarray, range)
    ):
        raise TypeError(
            "n_columns_per_capacity must be a sequence of ints; "
            f"got {_short(n_columns_per_capacity)}."
        )
    out = []
    for v in n_columns_per_capacity:
        if isinstance(v, (bool, np.bool_)) or not isinstance(v, numbers.Integral):
            raise TypeError(
                f"n_columns_per_capacity must hold ints; got {_short(v)} "
                f"in {_short(n_columns_per_capacity)}."
            )
        if not 1 <= v <= n_design:
            raise ValueError(
                f"n_columns_per_capacity values must lie in 1..{n_design} (the design's column "
                f"count); got {int(v)}."
            )
        out.append(int(v))
    if not out:
        raise ValueError("n_columns_per_capacity is empty; give at least one capacity.")
    return tuple(out)


def _householder(Z: NDArray[np.float64], y: NDArray[np.float64]):
    """Householder QR of Z (no pivoting): R (P, P), thin Q (n, P) and the complete z = Q^T y."""
    n, P = Z.shape
    (raw, tau), R = scipy.linalg.qr(Z, mode="raw")
    R = np.triu(R[:P, :P])
    lapack = scipy.linalg.lapack
    # complete Q^T y without forming the n x n matrix
    lwork = int(lapack.dormqr("L", "T", raw, tau, y[:, None], lwork=-1)[1][0])
    z, _, info = lapack.dormqr("L", "T", raw, tau, y[:, None].copy(), lwork=max(lwork, 1))
    if info != 0:  # pragma: no cover - LAPACK argument errors only
        raise RuntimeError(f"LAPACK dormqr failed with info={info}.")
    eye = np.zeros((n, P))
    eye[np.arange(P), np.arange(P)] = 1.0
    lwork = int(lapack.dormqr("L", "N", raw, tau, eye, lwork=-1)[1][0])
    Q, _, info = lapack.dormqr("L", "N", raw, tau, eye, lwork=max(lwork, 1))
    if info != 0:  # pragma: no cover
        raise RuntimeError(f"LAPACK dormqr failed with info={info}.")
    return R, np.asarray(Q), np.asarray(z).ravel()


def nested_least_squares(
    Z: ArrayLike,
    y: ArrayLike,
    *,
    n_columns_per_capacity: Sequence[int],
    rank_tol: float | None = None,
) -> NestedFit:
    """Least-squares fits on leading column blocks of ``Z``, all from one QR.

    The design is used exactly as given: include a constant column if the model should have an
    intercept (the Legendre basis and :func:`scaled_design` do), leave it out for a model through
    the origin.

    Parameters
    ----------
    Z : array-like of shape (n_samples, n_columns_max)
        Design matrix whose columns are ordered from the simplest capacity to the most complex.
        Needs ``n_samples >= n_columns_max``.
    y : array-like of shape (n_samples,)
        Response.
    n_columns_per_capacity : sequence of int
        Number of leading columns used at each capacity (each in 1..n_columns_max; any order).
    rank_tol : float, optional
        Relative tolerance for rank loss, default ``max(n, P) * machine epsilon``.

    Returns
    -------
    NestedFit

    Notes
    -----
    Householder QR without pivoting, ``Z = Q R`` (METHODS.md section 9). With ``z = Q^T y`` from
    the complete Q, ``RSS_k = sum_{j >= p_k} z_j^2`` and ``h_ii^(k) = sum_{j < p_k} Q_ij^2``. The
    coefficient covariance is ``sigma2_k (R_k^T R_k)^{-1}`` with ``sigma2_k = RSS_k / (n - p_k)``.

    Examples
    --------
    >>> import numpy as np
    >>> x = np.arange(5.0)
    >>> Z = np.column_stack([np.ones(5), x])
    >>> fit = nested_least_squares(Z, [1, 3, 2, 5, 4], n_columns_per_capacity=[2])
    >>> fit.coef.round(6)
    array([[1.4, 0.8]])
    >>> fit.leverage.round(6)
    array([[0.6, 0.3, 0.2, 0.3, 0.6]])
    """
    Za = _as_float_array(Z, "Z", 2)
    ya = _as_float_array(y, "y", 1)
    n, P = Za.shape
    if ya.shape[0] != n:
        raise ValueError(f"y has {ya.shape[0]} values but Z has {n} rows; they must match.")
    if n < P:
        raise ValueError(
            f"Z has more columns ({P}) than rows ({n}); least squares needs n_samples >= "
            "n_columns. Drop the largest capacities."
        )
    caps = _check_capacity_columns(n_columns_per_capacity, P)
    if rank_tol is None:
        rank_tol = max(n, P) * np.finfo(np.float64).eps
    elif isinstance(rank_tol, bool) or not isinstance(rank_tol, numbers.Real) or not rank_tol > 0:
        raise ValueError(f"rank_tol must be a positive number; got {_short(rank_tol)}.")

    R, Q, z = _householder(Za, ya)
    r_diag = np.diag(R).copy()
    ref = abs(r_diag[0])
    small = np.abs(r_diag) < rank_tol * ref if ref > 0 else np.ones(P, dtype=bool)
    tail = np.concatenate([np.cumsum((z[::-1]) ** 2)[::-1], [0.0]])  # tail[k] = sum_{j>=k} z_j^2
    lev_cum = np.cumsum(Q**2, axis=1)
    fit_cum = np.cumsum(Q * z[:P], axis=1)

    K = len(caps)
    coef = np.zeros((K, P))
    fitted = np.empty((K, n))
    rss = np.empty(K)
    leverage = np.empty((K, n))
    rank = np.empty(K, dtype=np.intp)
    deficient = np.empty(K, dtype=bool)
    condition = np.empty(K)
    factor = np.zeros((K, P, P))
    full_inverse = None

    for i, p in enumerate(caps):
        Rk = R[:p, :p]
        svals = np.linalg.svd(Rk, compute_uv=False)
        condition[i] = svals[0] / svals[-1] if svals[-1] > 0 else np.inf
        deficient[i] = bool(small[:p].any())
        if not deficient[i]:
            rank[i] = p
            coef[i, :p] = scipy.linalg.solve_triangular(Rk, z[:p])
            fitted[i] = fit_cum[:, p - 1]
            rss[i] = tail[p]
            leverage[i] = lev_cum[:, p - 1]
            if full_inverse is None or full_inverse.shape[0] < p:
                full_inverse = scipy.linalg.solve_triangular(Rk, np.eye(p))
            # the inverse of a leading block of a triangular matrix is the leading block of its
            # inverse, so one inverse serves every smaller capacity
            factor[i, :p, :p] = full_inverse[:p, :p]
        else:
            U, s, Vt = np.linalg.svd(Rk)
            r = int(np.sum(s > rank_tol * s[0])) if s[0] > 0 else 0
            rank[i] = r
            Ur, sr, Vr = U[:, :r], s[:r], Vt[:r].T
            w = Ur.T @ z[:p]
            coef[i, :p] = Vr @ (w / sr)
            Qr = Q[:, :p] @ Ur
            fitted[i] = Qr @ w
            # dropped directions of the block join the tail: still a sum of squares
            rss[i] = tail[p] + float(np.sum((z[:p] - Ur @ w) ** 2))
            leverage[i] = np.sum(Qr**2, axis=1)
            factor[i, :p, :r] = Vr / sr
    dof = n - rank
    with np.errstate(invalid="ignore", divide="ignore"):
        sigma2 = np.where(dof > 0, rss / np.maximum(dof, 1), np.nan)
    return NestedFit(
        n_samples=n,
        n_columns=caps,
        rank=rank,
        rank_deficient=deficient,
        condition=condition,
        coef=coef,
        fitted=fitted,
        residuals=ya[None, :] - fitted,
        rss=rss,
        leverage=leverage,
        residual_dof=dof,
        sigma2=sigma2,
        cov_factor=factor,
        r_diag=r_diag,
    )


# --------------------------------------------------------------------------------------------
# feature ladders: centred and scaled predictors
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class ScaledDesign:
    """Predictors centred and scaled for a stable factorisation, with the way back.

    With an intercept the design is ``[1, (X - center) / scale]`` (column means and standard
    deviations); without one it is ``X / scale`` (root mean squares, no centring, so the model
    still passes through the origin). Either way the column space of every leading block is that
    of the raw predictors (plus the constant), so the fits are unchanged.

    Attributes
    ----------
    Z : ndarray of shape (n, n_features + fit_intercept)
        The design.
    center, scale : ndarray of shape (n_features,)
        Shift and scale of every predictor (``center`` is zero without an intercept).
    fit_intercept : bool
        Whether the first column of ``Z`` is the constant.

    Examples
    --------
    >>> d = scaled_design([[1.0], [2.0], [3.0]], fit_intercept=True)
    >>> d.Z.round(4)
    array([[ 1.    , -1.2247],
           [ 1.    ,  0.    ],
           [ 1.    ,  1.2247]])
    """

    Z: NDArray[np.float64]
    center: NDArray[np.float64]
    scale: NDArray[np.float64]
    fit_intercept: bool

    def to_user_matrix(self, n_columns: int | None = None) -> NDArray[np.float64]:
        """Matrix ``T`` with coefficients on the raw predictors = ``T @ coef`` (leading block).

        Parameters
        ----------
        n_columns : int, optional
            Number of leading design columns (default: all).

        Returns
        -------
        ndarray of shape (n_columns, n_columns)

        Examples
        --------
        >>> d = scaled_design([[1.0], [2.0], [3.0]], fit_intercept=True)
        >>> d.to_user_matrix().round(4)
        array([[ 1.    , -2.4495],
               [ 0.    ,  1.2247]])
        """
        P = self.Z.shape[1]
        k = P if n_columns is None else int(n_columns)
        if not 1 <= k <= P:
            raise ValueError(f"n_columns must lie in 1..{P}; got {k}.")
        T = np.zeros((P, P))
        off = 1 if self.fit_intercept else 0
        if self.fit_intercept:
            T[0, 0] = 1.0
            T[0, 1:] = -self.center / self.scale
        T[np.arange(off, P), np.arange(off, P)] = 1.0 / self.scale
        return T[:k, :k]


def scaled_design(X: ArrayLike, *, fit_intercept: bool = True) -> ScaledDesign:
    """Centre and scale predictors (see :class:`ScaledDesign`).

    Parameters
    ----------
    X : array-like of shape (n_samples, n_features)
        Predictors, in the order they enter the ladder.
    fit_intercept : bool, default=True
        Put a constant first column in the design (and centre the predictors).

    Returns
    -------
    ScaledDesign

    Examples
    --------
    >>> scaled_design([[3.0], [4.0]], fit_intercept=False).scale.round(4)
    array([3.5355])
    """
    if not isinstance(fit_intercept, (bool, np.bool_)):
        raise TypeError(f"fit_intercept must be True or False; got {_short(fit_intercept)}.")
    Xa = _as_float_array(X, "X", 2)
    if fit_intercept:
        center = Xa.mean(axis=0)
        centred = Xa - center
        scale = np.sqrt(np.mean(centred**2, axis=0))
        what = "constant"
    else:
        center = np.zeros(Xa.shape[1])
        centred = Xa
        scale = np.sqrt(np.mean(Xa**2, axis=0))
        what = "all zero"
    bad = np.flatnonzero(~(scale > 0))
    if bad.size:
        j = int(bad[0])
        raise ValueError(
            f"X column {j} is {what} (every value is {Xa[0, j]!r}); it cannot be a predictor "
            "here. Drop it."
        )
    Zs = centred / scale
    Z = np.column_stack([np.ones(Xa.shape[0]), Zs]) if fit_intercept else Zs
    return ScaledDesign(Z=Z, center=center, scale=scale, fit_intercept=bool(fit_intercept))


# --------------------------------------------------------------------------------------------
# coefficients in the user's units
# --------------------------------------------------------------------------------------------


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
        Standard deviations ``sqrt(diag(sigma2 (Z^T Z)^{-1}))`` mapped to these units.
    residual_sd : float
        ``sqrt(RSS / (n - p))``.
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


def user_coefficients(
    fit: NestedFit, index: int, to_user: NDArray[np.float64], terms: Sequence[Any] | None = None
) -> UserCoefficients:
    """Map the coefficients of capacity ``index`` through a linear change of basis.

    Parameters
    ----------
    fit : NestedFit
    index : int
        Position of the capacity in ``fit``.
    to_user : ndarray of shape (p, p)
        Matrix from design coefficients to user coefficients, ``p = fit.n_columns[index]``
        (:meth:`complexity.basis.PolynomialBasis.monomial_matrix`,
        :meth:`ScaledDesign.to_user_matrix`).
    terms : sequence, optional
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
    >>> user_coefficients(fit, 0, np.eye(2)).coef_sd.round(6)
    array([0.848528, 0.34641 ])
    """
    if isinstance(index, bool) or not isinstance(index, numbers.Integral):
        raise TypeError(f"index must be an int; got {_short(index)}.")
    if not -fit.n_capacities <= index < fit.n_capacities:
        raise ValueError(f"index must lie in 0..{fit.n_capacities - 1}; got {index}.")
    p = fit.n_columns[index]
    T = np.asarray(to_user, dtype=np.float64)
    if T.shape != (p, p):
        raise ValueError(f"to_user must have shape {(p, p)} for this capacity; got {T.shape}.")
    sigma2 = float(fit.sigma2[index])
    if not np.isfinite(sigma2):
        raise ValueError(
            f"capacity {index} leaves no residual degrees of freedom (n = p = {p}); "
            "standard deviations are undefined."
        )
    M = T @ fit.cov_factor[index, :p, :p]
    sd_unit = np.sqrt(np.sum(M**2, axis=1))
    return UserCoefficients(
        terms=list(range(p)) if terms is None else list(terms),
        coef=T @ fit.coef[index, :p],
        coef_sd=np.sqrt(sigma2) * sd_unit,
        residual_sd=float(np.sqrt(sigma2)),
        cov=sigma2 * (M @ M.T),
    )


def fit_polynomial(
    x: ArrayLike, y: ArrayLike, *, degree: int, domain: ArrayLike | None = None
) -> UserCoefficients:
    """Least-squares polynomial of one total degree, reported in the user's units.

    The fit is done on the Legendre basis of mapped x (:class:`~complexity.basis.PolynomialBasis`)
    and converted back exactly; this keeps high degrees accurate even for x far from zero. The
    coefficients then get one step of iterative refinement whose residual ``y - p(x)`` is
    computed exactly in rational arithmetic, and the residual SD comes from that exact residual.
    That costs O(n_samples x n_terms) big-rational operations: this function reports one fit, it
    is not meant for sweeps.

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
    Xa = _as_float_array(x, "x", 2)
    ya = _as_float_array(y, "y", 1)
    Z = basis.transform(Xa)
    n, P = Z.shape
    fit = nested_least_squares(Z, ya, n_columns_per_capacity=[P])
    if fit.residual_dof[0] < 1:
        raise ValueError(
            f"degree {degree} needs {P} coefficients but there are only {n} observations; "
            "standard deviations need n > number of coefficients."
        )
    # one step of iterative refinement, the residual computed exactly (rational arithmetic)
    coef = fit.coef[0]
    resid = _exact_residuals(Xa, ya, basis.exact_monomials(coef))
    delta = nested_least_squares(Z, resid, n_columns_per_capacity=[P]).coef[0]
    mono = basis.exact_monomials(coef, delta)
    resid = _exact_residuals(Xa, ya, mono)
    sigma2 = math.fsum(resid**2) / float(fit.residual_dof[0])
    M = basis.monomial_matrix(P) @ fit.cov_factor[0]
    return UserCoefficients(
        terms=list(basis.terms_),
        coef=np.array([float(mono[t]) for t in basis.terms_]),
        coef_sd=np.sqrt(sigma2) * np.sqrt(np.sum(M**2, axis=1)),
        residual_sd=math.sqrt(sigma2),
        cov=sigma2 * (M @ M.T),
    )


def fit_linear(X: ArrayLike, y: ArrayLike, *, fit_intercept: bool = True) -> UserCoefficients:
    """Least-squares linear model on all predictors, reported in the user's units.

    The predictors are centred and scaled (:func:`scaled_design`) before the factorisation and the
    coefficients mapped back.

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
    P = design.Z.shape[1]
    fit = nested_least_squares(design.Z, y, n_columns_per_capacity=[P])
    n_feat = design.center.size
    terms: list[Any] = (["intercept"] if fit_intercept else []) + list(range(n_feat))
    return user_coefficients(fit, 0, design.to_user_matrix(P), terms)


# ============================================================================================
# The exact engine used by sweep(): every capacity of every resample from one basis
# ============================================================================================
#
# Notation. Z(x) is the ladder's design (graded Legendre columns, or [1, scaled predictors]);
# capacity c uses its first n_cols[c] columns. One Householder QR of the reference design,
# Z_ref = Q0 R0, gives basis functions q(x) = Z(x) R0^{-1} that are orthonormal over the reference
# rows and nested like Z. A training set is a weight vector c (bootstrap multiplicities, 0/1 for
# folds) over the rows. Its Gram matrix G = Q0^T diag(c) Q0 and g = Q0^T diag(c) y come, for a
# whole chunk of resamples, from ONE matrix product (counts @ [q_j q_k, q_j y]). With the Cholesky
# factor G = L L^T, the columns of U = Q0 L^{-T} are orthonormal in the weighted metric and still
# nested, so with w = L^{-1} g every capacity follows: coefficients (in q) of capacity c are
# L^{-T}[:, :k] w[:k] (a cumulative sum), training RSS_c = RSS_top + sum_{k_c <= j < top} w_j^2
# (a tail sum: no cancellation). A resample whose Gram matrix is badly conditioned is redone with
# a QR of its own weighted rows (same outputs: R^{-1} and z = Qw^T sqrt(c) y). All reductions run
# single-threaded on fixed shapes, with every resample at a fixed row of its chunk, so results are
# bit-identical for any n_jobs and for any subset of resamples (a resumed checkpoint).

_CHUNK_DOUBLES = 4_000_000  # bound on the doubles of one chunk's work arrays (about 32 MB)
# resamples per chunk: the largest of these that fits (round numbers, so usual resample counts
# fill their chunks); it depends on n only, never on which resamples are asked for
_CHUNK_SIZES = (10, 20, 25, 50, 100, 200, 250, 500, 1000)
_GRAM_CONDITION_LIMIT = 1e6  # above this (upper bound of cond(G_c)) a resample is refit by QR
_RSS_CANCELLATION = 1e-4  # RSS below this share of y'Cy is recomputed from residuals


def supports(problem: Problem) -> bool:
    """True when the exact engine can serve ``problem``.

    That is a :class:`~complexity.PolynomialLadder`, or a :class:`~complexity.FeatureLadder` with
    the default least-squares estimator and a fixed order, without sample weights.

    Examples
    --------
    >>> import numpy as np
    >>> import complexity as cx
    >>> from complexity.engine import Problem
    >>> X = np.linspace(0, 1, 20)[:, None]
    >>> ladder = cx.PolynomialLadder(range(0, 3))
    >>> problem = Problem(ladder, ladder.build(X), X, X[:, 0], X, X[:, 0], cx.Bootstrap(5),
    ...                   np.random.SeedSequence(0), X)
    >>> supports(problem)
    True
    """
    from ..ladders import FeatureLadder, PolynomialLadder

    ladder = problem.ladder
    if problem.sample_weight is not None or not getattr(ladder, "linear_least_squares", False):
        return False
    if isinstance(ladder, PolynomialLadder):
        return True
    return isinstance(ladder, FeatureLadder) and ladder.estimator is None and not ladder.ranked


@dataclass(frozen=True)
class _LadderDesign:
    """How the ladder turns X into design columns (fixed from the full data)."""

    kind: str  # "polynomial" or "features"
    n_cols: tuple[int, ...]  # design columns used at each capacity
    basis: PolynomialBasis | None = None
    columns: tuple[int, ...] = ()  # features: predictor positions, in order of entry
    center: NDArray[np.float64] | None = None
    scale: NDArray[np.float64] | None = None

    @property
    def n_design(self) -> int:
        return max(self.n_cols)

    def __call__(self, X: NDArray[np.float64]) -> NDArray[np.float64]:
        """The design Z(X) with every column any capacity uses."""
        if self.kind == "polynomial":
            assert self.basis is not None
            return self.basis.transform(X)[:, : self.n_design]
        cols = np.asarray(self.columns, dtype=np.intp)
        body = (X[:, cols] - self.center) / self.scale
        return np.column_stack([np.ones(X.shape[0]), body])


def _ladder_design(problem: Problem) -> _LadderDesign:
    """Read the basis settings from the models the ladder built (what the generic path fits)."""
    from ..ladders import PolynomialLadder

    ladder = problem.ladder
    design_X = np.asarray(problem.design_X, dtype=np.float64)
    if design_X.ndim == 1:
        design_X = design_X[:, None]
    if isinstance(ladder, PolynomialLadder):
        legendre = problem.models[0].steps[0][1]
        degrees = tuple(int(d) for d in ladder.capacities)
        basis = PolynomialBasis(max(degrees), legendre.domain).fit(design_X)
        return _LadderDesign("polynomial", tuple(basis.n_columns(d) for d in degrees), basis=basis)
    counts = tuple(int(k) for k in ladder.capacities)
    order: list[int] = []
    for model in problem.models:
        if hasattr(model, "steps"):  # Pipeline([_FirstColumns(k, order), LinearRegression()])
            given = model.steps[0][1].order
            order = list(range(design_X.shape[1])) if given is None else [int(j) for j in given]
            break
    cols = tuple(order[: max(counts)])
    sub = design_X[:, list(cols)] if cols else np.empty((design_X.shape[0], 0))
    center = sub.mean(axis=0)
    scale = np.sqrt(np.mean((sub - center) ** 2, axis=0))
    scale = np.where(scale > 0, scale, 1.0)  # a constant column stays zero: caught as rank loss
    return _LadderDesign(
        "features", tuple(k + 1 for k in counts), columns=cols, center=center, scale=scale
    )


def _valid_prefix(r_diag: NDArray[np.float64], tol: float) -> int:
    """Number of leading columns before the first pivot below ``tol * max(previous pivots)``."""
    a = np.abs(r_diag)
    ref = np.maximum.accumulate(a)
    bad = np.flatnonzero(~(a > tol * np.maximum(ref, np.finfo(np.float64).tiny)))
    return int(bad[0]) if bad.size else a.size


def _rank_tol(n: int, P: int) -> float:
    return 10.0 * max(n, P) * np.finfo(np.float64).eps


@dataclass
class _Reference:
    """The reference factorisation and everything shared by all resamples."""

    design: _LadderDesign
    Q0: NDArray[np.float64]  # (n_ref, pv) orthonormal columns over the reference rows
    R0inv: NDArray[np.float64]  # (pv, pv)
    pv: int  # usable leading columns (numerical rank of the reference design)
    n_cols: NDArray[np.intp]  # per capacity
    chunk: int  # resamples per chunk (fixed from the shapes only)


def _reference(problem: Problem, Z_ref: NDArray[np.float64], design: _LadderDesign) -> _Reference:
    n, P = Z_ref.shape
    (raw, tau), R = scipy.linalg.qr(Z_ref, mode="raw")
    R = np.triu(R[:P, :P])
    pv = _valid_prefix(np.diag(R), _rank_tol(n, P))
    lapack = scipy.linalg.lapack
    eye = np.zeros((n, P))
    eye[np.arange(P), np.arange(P)] = 1.0
    lwork = int(lapack.dormqr("L", "N", raw, tau, eye, lwork=-1)[1][0])
    Q, _, _ = lapack.dormqr("L", "N", raw, tau, eye, lwork=max(lwork, 1))
    Q0 = np.ascontiguousarray(np.asarray(Q)[:, :pv])
    R0inv = scipy.linalg.solve_triangular(R[:pv, :pv], np.eye(pv)) if pv else np.zeros((0, 0))
    chunk = _chunk_size(n, len(design.n_cols))
    return _Reference(design, Q0, R0inv, pv, np.asarray(design.n_cols, dtype=np.intp), chunk)


def _chunk_size(n_rows: int, n_capacities: int) -> int:
    """Resamples per chunk: a function of the reference rows and the capacities only."""
    # per chunk: counts (chunk x n) and residuals (about chunk x n/2 x C for out-of-bag rows)
    fit_in = _CHUNK_DOUBLES // max(n_rows * max(1, n_capacities // 2), 1)
    return max([size for size in _CHUNK_SIZES if size <= fit_in], default=_CHUNK_SIZES[0])


def block_size(problem: Problem) -> int:
    """Resamples per accumulation block: the engine's chunk (tallied where it is computed).

    Examples
    --------
    >>> import numpy as np
    >>> import complexity as cx
    >>> from complexity.engine import Problem
    >>> X = np.linspace(0, 1, 40)[:, None]
    >>> ladder = cx.PolynomialLadder(range(0, 11))
    >>> problem = Problem(ladder, ladder.build(X), X, X[:, 0], X, X[:, 0], cx.Bootstrap(5),
    ...                   np.random.SeedSequence(0), X)
    >>> block_size(problem)
    1000
    """
    return _chunk_size(_reference_rows(problem).shape[0], problem.n_capacities)


def _reference_rows(problem: Problem) -> NDArray[np.float64]:
    """The x rows the reference factorisation is made on: the data, or a simulation's fixed
    design (else its pilot draw with ``x_eval``)."""
    if not problem.simulated:
        assert problem.X is not None
        return problem.X
    plan = problem.plan
    return plan.design if plan.design is not None else problem.design_X


def _capacity_label(problem: Problem, c: int) -> str:
    return f"{problem.ladder.capacity_name} {problem.ladder.capacities[c]!r}"


def _rank_message(problem: Problem, c: int, where: str) -> str:
    return (
        f"{where} design is numerically rank deficient at {_capacity_label(problem, c)} (a column "
        "is a linear combination of earlier ones); least squares is not unique there"
    )


# -------------------------------------------------------------------- batched nested solves


def _from_gram(
    G: NDArray[np.float64], g: NDArray[np.float64], pv: NDArray[np.intp]
) -> tuple[NDArray, NDArray, NDArray, NDArray[np.bool_]]:
    """Cholesky route for a stack of Gram matrices.

    Returns ``(Tinv, w, cond_bound, ok)``: ``Tinv = L^{-T}`` (upper), ``w = L^{-1} g``, an upper
    bound of cond(G_k) for every leading block k, and False where Cholesky failed.
    """
    S, P, _ = G.shape
    G = G.copy()
    g = g.copy()
    for s in np.flatnonzero(pv < P):  # columns beyond a resample's usable prefix: identity
        k = pv[s]
        G[s, k:, :] = 0.0
        G[s, :, k:] = 0.0
        G[s, np.arange(k, P), np.arange(k, P)] = 1.0
        g[s, k:] = 0.0
    ok = np.ones(S, dtype=bool)
    try:
        L = np.linalg.cholesky(G)
    except np.linalg.LinAlgError:
        L = np.zeros_like(G)
        for s in range(S):
            try:
                L[s] = np.linalg.cholesky(G[s])
            except np.linalg.LinAlgError:
                ok[s] = False
                L[s] = np.eye(P)
    Linv = np.linalg.inv(L)
    w = np.einsum("sij,sj->si", Linv, g)
    rows_L = np.cumsum(np.sum(L**2, axis=2), axis=1)
    rows_Li = np.cumsum(np.sum(Linv**2, axis=2), axis=1)
    cond_bound = rows_L * rows_Li  # (||L_k||_F ||L_k^{-1}||_F)^2 >= cond(G_k)
    return np.transpose(Linv, (0, 2, 1)), w, cond_bound, ok


def _from_rows(
    A: NDArray[np.float64], v: NDArray[np.float64], pv: int
) -> tuple[NDArray, NDArray, int]:
    """QR route for one resample's weighted rows ``A`` (m, P) and response ``v`` (m,).

    Returns ``(Tinv, w, pv)`` with ``Tinv = R^{-1}`` on the usable prefix (identity after it),
    ``w = Qw^T v`` and the usable prefix after the rank check.
    """
    m, P = A.shape
    Tinv = np.eye(P)
    w = np.zeros(P)
    if pv == 0 or m == 0:
        return Tinv, w, 0
    Qw, R = np.linalg.qr(A[:, :pv])
    keep = min(pv, _valid_prefix(np.diag(R), _rank_tol(m, P)))
    if keep:
        Tinv[:keep, :keep] = scipy.linalg.solve_triangular(R[:keep, :keep], np.eye(keep))
        w[:keep] = Qw[:, :keep].T @ v
    return Tinv, w, keep


def _coefficients(
    Tinv: NDArray[np.float64], w: NDArray[np.float64], n_cols: NDArray[np.intp]
) -> NDArray[np.float64]:
    """Coefficients in the q basis for every capacity: ``Tinv[:, :k] @ w[:k]``, shape (S, P, C)."""
    cum = np.cumsum(Tinv * w[:, None, :], axis=2)
    # capacities past the usable columns are failures; clip so their (unused) index is valid
    return cum[:, :, np.clip(n_cols, 1, Tinv.shape[2]) - 1]


# -------------------------------------------------------------------- one chunk of resamples


def _fail_capacities(
    problem: Problem,
    ref: _Reference,
    distinct: int,
    pv: int,
    X_train_fn: Any,
    where: str = "training",
) -> dict[int, str]:
    """Failures of one resample: too few distinct rows (ladder's own message) or rank loss."""
    out: dict[int, str] = {}
    for c, k in enumerate(ref.n_cols):
        if k <= pv:
            continue
        message = None
        if distinct < k:
            message = problem.ladder.training_problem(c, X_train_fn())
        out[c] = message or _rank_message(problem, c, where)
    return out


@dataclass
class _ChunkFits:
    """Every capacity fitted on every training set of a chunk of data resamples."""

    pos: NDArray[np.intp]  # row of each resample in the chunk's arrays
    counts: NDArray[np.float64]  # (S, n) multiplicity of each row in each training set
    A1: NDArray[np.float64]  # (S, P + 1, C): residuals of all rows = Q0_target @ A1[s]
    rss: NDArray[np.float64]  # (S, C) training RSS
    distinct: NDArray[np.intp]  # (S,) distinct training rows
    pv: NDArray[np.intp]  # (S,) usable basis columns
    every_row: NDArray[np.float64] | None  # (S, n, C) residuals at every row (small problems)
    short: NDArray[np.bool_]  # (S,) fewer usable columns than the top capacity: some fits fail


def _chunk_fits(
    problem: Problem, ref: _Reference, shared: dict[str, Any], chunk: Sequence[Any]
) -> _ChunkFits:
    """Fit every capacity on every training set of the chunk (data plans)."""
    Q0, S, P = ref.Q0, ref.chunk, ref.pv
    n = Q0.shape[0]
    yc = shared["yc"]
    pos = np.array([r.index % S for r in chunk], dtype=np.intp)
    counts = np.zeros((S, n))
    for r, s in zip(chunk, pos):
        counts[s] = r.counts if r.counts is not None else np.bincount(r.train, minlength=n)
    # the one big product: every Gram matrix, Q^T diag(c) y and y^T diag(c) y of the chunk
    moments = _moments(counts, Q0, yc, shared)
    iu = shared["iu"]
    m = iu[0].size
    G = np.zeros((S, P, P))
    G[:, iu[0], iu[1]] = moments[:, :m]
    G[:, iu[1], iu[0]] = moments[:, :m]
    g = moments[:, m : m + P]
    yy = moments[:, m + P]

    # distinct training rows -> the capacities that can be fitted at all (a leading run)
    if shared["n_unique"] == n:
        distinct = np.count_nonzero(counts, axis=1)
    else:
        uid = shared["uid"]
        distinct = np.zeros(S, dtype=np.intp)
        for s in pos:
            distinct[s] = np.unique(uid[counts[s] > 0]).size
    fits = ref.n_cols[None, :] <= np.minimum(distinct, P)[:, None]
    pv = np.max(np.where(fits, ref.n_cols[None, :], 0), axis=1)

    Tinv, w, cond_bound, ok = _from_gram(G, g, pv)
    in_prefix = np.arange(P)[None, :] < pv[:, None]
    redo = ~ok | np.any(in_prefix & (cond_bound > _GRAM_CONDITION_LIMIT), axis=1)
    for s in np.flatnonzero(redo[pos]):
        s = pos[s]
        rows = np.flatnonzero(counts[s])
        root_c = np.sqrt(counts[s, rows])
        Tinv[s], w[s], pv[s] = _from_rows(Q0[rows] * root_c[:, None], root_c * yc[rows], pv[s])

    A = _coefficients(Tinv, w, ref.n_cols)  # (S, P, C)
    # training RSS of the largest usable fit: y'Cy - |w|^2 when that keeps >= 12 digits, else
    # (nearly exact fits, QR-refitted resamples) directly from its residuals
    rss_top = yy - np.sum(w**2, axis=1)
    direct = redo | (rss_top < _RSS_CANCELLATION * yy)
    for s in np.flatnonzero(direct[pos]):
        s = pos[s]
        rows = np.flatnonzero(counts[s])
        resid = yc[rows] - Q0[rows] @ (Tinv[s] @ w[s])
        rss_top[s] = float(np.sum(counts[s, rows] * resid**2))
    rss = rss_top[:, None] + _tail_sums(w)[:, np.minimum(ref.n_cols, P)]  # (S, C)
    C = ref.n_cols.size
    # residuals = [Q0, ybar - target] @ [[A], [1 ... 1]]: one product per resample gives
    # prediction - target for every capacity at its test rows
    Q0t = shared["Q0_target"]
    A1 = np.concatenate([A, np.ones((S, 1, C))], axis=1)
    # small problems: every row at once (one stacked product), then pick each test set
    every_row = np.matmul(Q0t[None], A1) if n * P * C <= 200_000 else None
    short = pv < int(ref.n_cols.max())
    return _ChunkFits(pos, counts, A1, rss, distinct, pv, every_row, short)


def _chunk_failures(
    problem: Problem, ref: _Reference, fits: _ChunkFits, r: Any, s: int
) -> dict[int, str]:
    """The capacities resample ``r`` (at row ``s``) could not fit, with messages."""
    if not fits.short[s]:
        return {}
    X = problem.X
    assert X is not None
    return _fail_capacities(
        problem, ref, int(fits.distinct[s]), int(fits.pv[s]), lambda: X[r.train]
    )


def _data_chunk(
    problem: Problem, ref: _Reference, shared: dict[str, Any], chunk: Sequence[Any]
) -> list[Outcome]:
    """Outcomes for resamples of the observed data (bootstrap, folds, any splitter)."""
    return _outcomes(problem, ref, shared, chunk, _chunk_fits(problem, ref, shared, chunk))


def _outcomes(
    problem: Problem,
    ref: _Reference,
    shared: dict[str, Any],
    chunk: Sequence[Any],
    fits: _ChunkFits,
) -> list[Outcome]:
    Q0t, C = shared["Q0_target"], ref.n_cols.size
    out = []
    for r, s in zip(chunk, fits.pos):
        failures = _chunk_failures(problem, ref, fits, r, s)
        if fits.every_row is not None:
            residuals = fits.every_row[s, r.test]
        else:
            residuals = np.take(Q0t, r.test, axis=0) @ fits.A1[s]
        train_mse = fits.rss[s] / fits.counts[s].sum()  # the training set's size
        if failures:
            bad = _failed_mask(failures, C)
            residuals[:, bad] = np.nan
            train_mse[bad] = np.nan
        out.append(Outcome(r.index, r.replicate, r.test, residuals, train_mse, failures))
    return out


def _products(Q0: NDArray, yc: NDArray, iu: tuple[NDArray, NDArray]) -> NDArray[np.float64]:
    """Columns ``q_j q_k`` (j <= k), ``q_j y`` and ``y^2`` of the count-weighted moments.

    Column order is that of ``iu`` (``numpy.triu_indices``: row by row), written in place.
    """
    n, P = Q0.shape
    m = iu[0].size
    out = np.empty((n, m + P + 1))
    start = 0
    for j in range(P):  # the products q_j q_k for k >= j: one broadcast multiply per j
        np.multiply(Q0[:, j : j + 1], Q0[:, j:], out=out[:, start : start + P - j])
        start += P - j
    np.multiply(Q0, yc[:, None], out=out[:, m : m + P])
    np.multiply(yc, yc, out=out[:, m + P])
    return out


def _moments(
    counts: NDArray[np.float64], Q0: NDArray, yc: NDArray, shared: dict[str, Any]
) -> NDArray[np.float64]:
    """``counts @ products``; for large n in fixed row blocks, so the products never fill memory."""
    if shared["QQ"] is not None:
        return counts @ shared["QQ"]
    block = shared["row_block"]
    total = None
    for start in range(0, Q0.shape[0], block):
        rows = slice(start, start + block)
        part = counts[:, rows] @ _products(Q0[rows], yc[rows], shared["iu"])
        total = part if total is None else total + part
    return total


def _tail_sums(w: NDArray[np.float64]) -> NDArray[np.float64]:
    """``out[s, j] = sum_{i >= j} w[s, i]^2`` with a trailing zero column (shape (S, P + 1))."""
    S, P = w.shape
    out = np.zeros((S, P + 1))
    out[:, :P] = np.cumsum((w**2)[:, ::-1], axis=1)[:, ::-1]
    return out


def _failed_mask(failures: dict[int, str], C: int) -> NDArray[np.bool_]:
    bad = np.zeros(C, dtype=bool)
    bad[list(failures)] = True
    return bad


def _simulation_chunk(
    problem: Problem, ref: _Reference, shared: dict[str, Any], chunk: Sequence[Any]
) -> list[Outcome]:
    """Outcomes for simulated training sets (fixed design: one basis, many y)."""
    Q0, S, P = ref.Q0, ref.chunk, ref.pv
    q_eval, target = shared["q_eval"], problem.target
    C = ref.n_cols.size
    out = []
    if shared["fixed"]:
        n = Q0.shape[0]
        Y = np.zeros((n, S))
        means = np.zeros(S)
        pos = [r.index % S for r in chunk]
        for r, s in zip(chunk, pos):
            _, y = problem.training_set(r)[:2]
            means[s] = float(np.mean(y))
            Y[:, s] = y - means[s]
        W = (Q0.T @ Y).T  # (S, P): G = I on the fixed design, so w = Q0^T y
        k_top = shared["pv_fixed"]
        W[:, k_top:] = 0.0
        A = W[:, :, None] * (np.arange(P)[:, None] < ref.n_cols[None, :])[None]  # (S, P, C)
        resid_top = Y.T - W @ Q0.T
        rss = np.sum(resid_top**2, axis=1)[:, None] + _tail_sums(W)[:, np.minimum(ref.n_cols, P)]
        failures = shared["fixed_failures"]
        bad = _failed_mask(failures, C)
        for r, s in zip(chunk, pos):
            pred = q_eval @ A[s] + means[s]
            residuals = pred - target[:, None]
            residuals[:, bad] = np.nan
            train_mse = np.where(bad, np.nan, rss[s] / n)
            out.append(Outcome(r.index, r.replicate, r.test, residuals, train_mse, dict(failures)))
        return out
    design = ref.design
    for r in chunk:
        X_b, y_b = problem.training_set(r)[:2]
        n_b = y_b.size
        mean = float(np.mean(y_b))
        yc = y_b - mean
        distinct = int(np.unique(X_b, axis=0).shape[0])
        fits = ref.n_cols[ref.n_cols <= min(distinct, P)]
        pv = int(fits.max()) if fits.size else 0
        q_b = design(X_b)[:, :P] @ ref.R0inv
        Tinv, w, pv = _from_rows(q_b, yc, pv)
        A = _coefficients(Tinv[None], w[None], ref.n_cols)[0]
        resid_top = yc - q_b @ (Tinv @ w)
        rss = float(resid_top @ resid_top) + _tail_sums(w[None])[0, np.minimum(ref.n_cols, P)]
        failures = _fail_capacities(problem, ref, distinct, pv, lambda X_b=X_b: X_b)
        bad = _failed_mask(failures, C)
        residuals = q_eval @ A + mean - target[:, None]
        residuals[:, bad] = np.nan
        out.append(
            Outcome(
                r.index, r.replicate, r.test, residuals, np.where(bad, np.nan, rss / n_b), failures
            )
        )
    return out


def _row_ids(X: NDArray[np.float64]) -> NDArray[np.intp]:
    """Label of each row's distinct value (rows equal across all columns share a label)."""
    return row_groups(X)[0]


def _prepare(problem: Problem) -> tuple[_Reference, dict[str, Any]]:
    """Reference factorisation and the arrays every chunk shares."""
    design = _ladder_design(problem)
    shared: dict[str, Any] = {}
    if not problem.simulated:
        assert problem.X is not None and problem.y is not None
        X, y = problem.X, problem.y
        ref = _reference(problem, design(X), design)
        P = ref.pv
        ybar = float(np.mean(y))
        yc = y - ybar
        iu = np.triu_indices(P)
        Q0 = ref.Q0
        n = Q0.shape[0]
        n_products = iu[0].size + P + 1
        shared.update(
            yc=yc,
            ybar=ybar,
            iu=iu,
            QQ=_products(Q0, yc, iu) if n_products * n <= _CHUNK_DOUBLES else None,
            row_block=max(1, _CHUNK_DOUBLES // n_products),
            Q0_target=np.column_stack([Q0, ybar - problem.target]),
        )
        uid = _row_ids(X)
        shared.update(uid=uid, n_unique=int(uid.max()) + 1 if uid.size else 0)
        return ref, shared
    plan = problem.plan
    fixed = plan.design is not None
    Z_ref = design(_reference_rows(problem))
    ref = _reference(problem, Z_ref, design)
    shared["fixed"] = fixed
    shared["q_eval"] = design(problem.X_eval)[:, : ref.pv] @ ref.R0inv
    if fixed:
        distinct = int(np.unique(plan.design, axis=0).shape[0])
        fits = ref.n_cols[ref.n_cols <= min(distinct, ref.pv)]
        pv = int(fits.max()) if fits.size else 0
        shared["pv_fixed"] = pv
        shared["fixed_failures"] = _fail_capacities(
            problem, ref, distinct, pv, lambda: plan.design, where="fixed"
        )
    return ref, shared


def _chunk_task(
    problem: Problem, ref: _Reference, shared: dict[str, Any], chunk: Sequence[Any]
) -> list[Outcome]:
    compute = _simulation_chunk if problem.simulated else _data_chunk
    return _single_blas(compute, problem, ref, shared, chunk)


def _chunk_tally(
    problem: Problem, ref: _Reference, shared: dict[str, Any], chunk: Sequence[Any]
) -> Tally:
    return _single_blas(_tally_chunk, problem, ref, shared, chunk)


def _tally_chunk(
    problem: Problem, ref: _Reference, shared: dict[str, Any], chunk: Sequence[Any]
) -> Tally:
    """The chunk's tally; small data problems go straight from the dense residuals."""
    n_points, C = problem.X_eval.shape[0], ref.n_cols.size
    if problem.simulated:
        return tally(_simulation_chunk(problem, ref, shared, chunk), n_points, C)
    fits = _chunk_fits(problem, ref, shared, chunk)
    if fits.every_row is not None:
        builder = TallyBuilder(n_points, C)
        if _add_dense(builder, problem, ref, chunk, fits):
            return builder.finish()
    return tally(_outcomes(problem, ref, shared, chunk, fits), n_points, C)


def _add_dense(
    builder: TallyBuilder, problem: Problem, ref: _Reference, chunk: Sequence[Any], fits: _ChunkFits
) -> bool:
    """Hand the chunk's residuals at every row to ``builder`` without per-resample outcomes."""
    assert fits.every_row is not None
    pos = fits.pos
    if all(r.counts is not None for r in chunk):  # bootstrap: out of bag = never drawn
        scored = fits.counts[pos] == 0
    else:
        scored = np.zeros((len(chunk), fits.counts.shape[1]), dtype=bool)
        for k, r in enumerate(chunk):
            scored[k, r.test] = True
    failures = [_chunk_failures(problem, ref, fits, r, s) for r, s in zip(chunk, pos)]
    train_mse = fits.rss[pos] / fits.counts[pos].sum(axis=1)[:, None]
    C = ref.n_cols.size
    for k, f in enumerate(failures):
        if f:
            train_mse[k, _failed_mask(f, C)] = np.nan
    return builder.add_dense(
        fits.every_row[pos],
        scored,
        [r.index for r in chunk],
        [r.replicate for r in chunk],
        train_mse,
        failures,
    )


def _single_blas(compute: Any, *args: Any) -> Any:
    """``compute(*args)`` with BLAS single-threaded.

    The order of every floating-point sum is then fixed by the shapes, so results do not depend
    on n_jobs, the backend or the other resamples of the chunk.
    """
    if _blas_held:  # a thread of the process running the sweep, which holds the setting
        return compute(*args)
    with _blas_controller().limit(limits=1, user_api="blas"):
        return compute(*args)


_blas_held = 0  # runs in this process currently holding BLAS at one thread (see _run_chunks)


@functools.lru_cache(maxsize=1)
def _blas_controller() -> Any:
    """One threadpoolctl controller per process (finding the libraries costs milliseconds)."""
    from threadpoolctl import ThreadpoolController

    return ThreadpoolController()


def _group(resamples: Sequence[Any], size: int) -> Iterator[list[Any]]:
    """Consecutive resamples sharing ``index // size``: a chunk never depends on the others.

    A generator, so that only the chunks joblib has dispatched exist at any time (a lazy plan
    then never holds every resample's index arrays).
    """
    group: list[Any] = []
    seen: set[int] = set()
    for r in resamples:
        if group and group[0].index // size == r.index // size and r.index not in seen:
            group.append(r)
        else:
            if group:
                yield group
            group, seen = [r], set()
        seen.add(r.index)
    if group:
        yield group


def run_tallies(
    problem: Problem,
    resamples: Sequence[Any],
    *,
    n_jobs: int | None = None,
    on_done: Any = None,
) -> Iterator[Tally]:
    """Yield one :class:`~complexity.accumulate.Tally` per chunk of resamples, in order.

    Like :func:`run`, but each chunk's outcomes are reduced to their tally in the worker that
    computed them, so only per-point sums travel back and the accumulation runs in parallel.
    The tallies equal those of :func:`run`'s outcomes grouped by :func:`block_size`.

    Examples
    --------
    >>> import numpy as np
    >>> import complexity as cx
    >>> from complexity.engine import Problem
    >>> rng = np.random.default_rng(0)
    >>> X = rng.uniform(0, 1, (30, 1)); y = np.sin(4 * X[:, 0]) + rng.normal(0, 0.1, 30)
    >>> ladder, plan, root = cx.PolynomialLadder(range(0, 4)), cx.Bootstrap(3), np.random.SeedSequence(0)
    >>> problem = Problem(ladder, ladder.build(X), X, y, X, y, plan, root, X)
    >>> [t.index.tolist() for t in run_tallies(problem, plan.resamples(30, root))]
    [[0, 1, 2]]
    """
    yield from _run_chunks(problem, resamples, _chunk_tally, n_jobs, on_done)


def run(
    problem: Problem,
    resamples: Sequence[Any],
    *,
    n_jobs: int | None = None,
    on_done: Any = None,
) -> Iterator[Outcome]:
    """Yield the outcome of every resample, in order, for a least-squares ladder.

    Every capacity of a chunk of resamples comes from one matrix product (the weighted Gram
    matrices of a basis orthonormal over the data) and small per-resample factorisations; see
    the module notes. Results are identical for any ``n_jobs`` and any joblib backend, and for
    any subset of the resamples (so a resumed sweep equals an uninterrupted one).

    Parameters
    ----------
    problem : complexity.engine.Problem
        A problem this engine :func:`supports`.
    resamples : sequence of complexity.plans.Resample
    n_jobs : int, optional
        Workers for :class:`joblib.Parallel` (chunks of resamples are the tasks).
    on_done : callable, optional
        Called with the number of fits finished after each chunk.

    Yields
    ------
    complexity.engine.Outcome

    Examples
    --------
    >>> import numpy as np
    >>> import complexity as cx
    >>> from complexity.engine import Problem
    >>> rng = np.random.default_rng(0)
    >>> X = rng.uniform(0, 1, (30, 1)); y = np.sin(4 * X[:, 0]) + rng.normal(0, 0.1, 30)
    >>> ladder, plan, root = cx.PolynomialLadder(range(0, 4)), cx.Bootstrap(3), np.random.SeedSequence(0)
    >>> problem = Problem(ladder, ladder.build(X), X, y, X, y, plan, root, X)
    >>> outcomes = list(run(problem, plan.resamples(30, root)))
    >>> len(outcomes), outcomes[0].residuals.shape[1]
    (3, 4)
    """
    for outcomes in _run_chunks(problem, resamples, _chunk_task, n_jobs, on_done):
        yield from outcomes


def _run_chunks(
    problem: Problem, resamples: Sequence[Any], task: Any, n_jobs: int | None, on_done: Any
) -> Iterator[Any]:
    """``task(problem, ref, shared, chunk)`` for every chunk, in order, through joblib."""
    from joblib import Parallel, delayed

    if not supports(problem):
        raise ValueError(
            f"the exact engine cannot serve {problem.ladder!r} here (it needs a polynomial or "
            "fixed-order least-squares feature ladder without sample weights)."
        )
    with _blas_controller().limit(limits=1, user_api="blas"):
        ref, shared = _prepare(problem)
    groups = _group(resamples, ref.chunk)
    first, second = next(groups, None), next(groups, None)
    if first is None:
        return
    C = ref.n_cols.size
    global _blas_held
    # BLAS single-threaded for the whole run (a process-wide setting), held here so that tasks
    # running in threads of this process do not each set and restore it
    with _blas_controller().limit(limits=1, user_api="blas"):
        _blas_held += 1
        try:
            if second is None:
                results: Any = (task(problem, ref, shared, first),)
            else:
                every = itertools.chain((first, second), groups)
                tasks = (delayed(task)(problem, ref, shared, grp) for grp in every)
                # threads by default: numpy releases the GIL in the heavy steps and the shared
                # arrays (the basis, its products) are not copied for each task; a backend set
                # with joblib.parallel_config (processes, dask) takes precedence
                results = Parallel(n_jobs=n_jobs, prefer="threads", return_as="generator")(tasks)
            for value in results:
                yield value
                if on_done is not None:  # a list of outcomes or a tally
                    on_done((len(value) if isinstance(value, list) else value.n_resamples) * C)
        finally:
            _blas_held -= 1


# -------------------------------------------------------------------- the fit on all data


def _term_names(terms: list[tuple[int, ...]], names: list[str]) -> list[str]:
    out = []
    for exps in terms:
        parts = [names[j] if e == 1 else f"{names[j]}^{e}" for j, e in enumerate(exps) if e]
        out.append("*".join(parts) if parts else "1")
    return out


def _feature_names(problem: Problem, p: int) -> list[str]:
    names = getattr(problem, "feature_names", None)
    if names and len(names) == p:
        return [str(v) for v in names]
    return ["x"] if p == 1 else [f"x{j}" for j in range(p)]


class _CoefficientTables(Mapping):
    """Capacity -> coefficient table in the user's units, each made on first access and kept.

    The exact rational conversion of a high-degree polynomial costs about a millisecond per
    capacity, so tables are built only when asked for. Holds only small per-capacity arrays
    (never the fit's n-long columns) and pickles like any plain object.
    """

    def __init__(
        self, design: _LadderDesign, labels: list[str], M: NDArray, fit: NestedFit, position: dict
    ) -> None:
        self._design, self._labels, self._M, self._position = design, labels, M, position
        self._n_columns, self._coef = fit.n_columns, fit.coef.copy()
        self._sigma2, self._cov_factor = fit.sigma2.copy(), fit.cov_factor.copy()
        self._made: dict[Any, Any] = {}

    def __getitem__(self, capacity: Any) -> Any:
        if capacity not in self._made:
            if capacity not in self._position:
                raise KeyError(capacity)
            self._made[capacity] = self._table(self._position[capacity])
        return self._made[capacity]

    def __iter__(self) -> Iterator[Any]:
        return iter(self._position)

    def __len__(self) -> int:
        return len(self._position)

    def _table(self, c: int) -> Any:
        import pandas as pd

        k, M = self._n_columns[c], self._M
        coef = self._coef[c, :k]
        if self._design.kind == "polynomial":
            basis = self._design.basis
            assert basis is not None
            estimate = np.array(list(basis.monomial_coefficients(coef).values()))
        else:
            estimate = M[:k, :k] @ coef
        sigma2 = float(self._sigma2[c])
        MF = M[:k, :k] @ self._cov_factor[c, :k, :k]
        se = np.sqrt(sigma2 * np.sum(MF**2, axis=1)) if np.isfinite(sigma2) else np.full(k, np.nan)
        out = pd.DataFrame(
            {"estimate": estimate, "std_error": se},
            index=pd.Index(self._labels[:k], name="term"),
        )
        if not np.isfinite(sigma2):
            out.attrs["note"] = (
                "no residual degrees of freedom (as many coefficients as observations): "
                "standard errors are undefined"
            )
        return out


def _coefficient_tables(
    problem: Problem, design: _LadderDesign, fit: NestedFit, failed: set[int]
) -> Mapping[Any, Any] | None:
    """Coefficient tables in the user's units (made when first asked for)."""
    P = design.n_design
    if P > 300:  # exact conversion of hundreds of product terms is slow and not informative
        return None
    p = problem.X.shape[1]
    names = _feature_names(problem, p)
    if design.kind == "polynomial":
        basis = design.basis
        assert basis is not None
        M = basis.monomial_matrix(P)
        labels = _term_names(basis.terms_[:P], names)
    else:
        M = np.zeros((P, P))
        M[0, 0] = 1.0
        M[0, 1:] = -design.center / design.scale
        M[np.arange(1, P), np.arange(1, P)] = 1.0 / design.scale
        labels = ["intercept"] + [names[j] for j in design.columns]
    position = {cap: c for c, cap in enumerate(problem.ladder.capacities) if c not in failed}
    return _CoefficientTables(design, labels, M, fit, position)


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
    with _blas_controller().limit(limits=1, user_api="blas"):
        return _fit_full(problem)


def _fit_full(problem: Problem) -> FullFit:
    import warnings

    import pandas as pd

    from ..criteria import criteria_table

    design = _ladder_design(problem)
    X, y = problem.X, problem.y
    n = X.shape[0]
    fit = nested_least_squares(design(X), y, n_columns_per_capacity=list(design.n_cols))
    caps = list(problem.ladder.capacities)
    C = len(caps)
    failures = {
        c: _rank_message(problem, c, "full-data") for c in range(C) if fit.rank_deficient[c]
    }
    ok = np.array([c not in failures for c in range(C)])
    fitted = fit.fitted.T.copy()
    fitted[:, ~ok] = np.nan
    train_mse = np.where(ok, fit.rss / n, np.nan)

    columns = ["loocv", "gcv", "aic", "aicc", "bic", "cp", "fixed_design_variance"]
    criteria = pd.DataFrame(
        np.nan, index=pd.Index(caps, name=problem.ladder.capacity_name), columns=columns
    )
    exact = np.zeros(C, dtype=bool)
    notes: list[str] = []
    if ok.any():
        args = (fit.residuals[ok], fit.leverage[ok], fit.rank[ok])
        # y and the condition numbers turn on the exact-fit guard (criteria.rounding_level_rss)
        guard = {"rss": fit.rss[ok], "y": y, "condition": fit.condition[ok]}
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
            notes.append(_exact_fit_note(problem, exact, ok, table, y))

    diagnostics = pd.DataFrame(
        {
            "condition_number": fit.condition,
            "max_abs_coefficient": np.where(ok, np.max(np.abs(fit.coef), axis=1), np.nan),
            "n_params": fit.rank,
            "exact_fit": exact,
        },
        index=pd.Index(caps, name=problem.ladder.capacity_name),
    )
    distinct = int(row_groups(X)[1].size)
    from ..ladders import PolynomialLadder

    if not isinstance(problem.ladder, PolynomialLadder):  # PolynomialLadder says it up front
        full_caps = [caps[c] for c in range(C) if design.n_cols[c] >= distinct]
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
        coefficients=_coefficient_tables(problem, design, fit, set(failures)),
        leverage=np.where(ok[:, None], fit.leverage, np.nan),
        notes=notes,
    )


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
