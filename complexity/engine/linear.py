"""Exact least-squares path: every capacity of a nested ladder from one factorisation.

A nested ladder uses a leading block of the columns of one design ``Z`` at every capacity
(polynomial degree on the graded Legendre basis of :mod:`complexity.basis`, or the first k
predictors of a feature ladder). One Householder QR of the largest design, without column
pivoting (pivoting would reorder the columns and break the nesting), gives every smaller fit:

``Z[:, :k] = Q[:, :k] R[:k, :k]``, ``z = Q^T y`` (complete Q, applied without forming it),
``coef_k = R[:k, :k]^{-1} z[:k]``, ``RSS_k = sum_{j >= k} z_j^2`` (a tail sum, no cancellation),
``h_ii^(k) = sum_{j < k} Q_ij^2`` (a cumulative sum). See METHODS.md section 9.
"""

from __future__ import annotations

import math
import numbers
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import scipy.linalg
from numpy.typing import ArrayLike, NDArray

from ..basis import PolynomialBasis, _exact_residuals

__all__ = [
    "NestedFit",
    "ScaledDesign",
    "UserCoefficients",
    "fit_linear",
    "fit_polynomial",
    "nested_least_squares",
    "scaled_design",
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
