"""Nested least squares: every capacity of a nested ladder from one Householder QR.

A nested ladder uses a leading block of the columns of one design ``Z`` at every capacity
(polynomial degree on the graded Legendre basis of :mod:`complexity.basis`, or the first k
predictors of a feature ladder). One Householder QR of the largest design, without column
pivoting (pivoting would reorder the columns and break the nesting), gives every smaller fit:

``Z[:, :k] = Q[:, :k] R[:k, :k]``, ``z = Q^T y`` (complete Q, applied without forming it),
``coef_k = R[:k, :k]^{-1} z[:k]``, ``RSS_k = sum_{j >= k} z_j^2`` (a tail sum, no cancellation),
``h_ii^(k) = sum_{j < k} Q_ij^2`` (a cumulative sum).
"""

from __future__ import annotations

import numbers
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import scipy.linalg
from numpy.typing import ArrayLike, NDArray

from .._validation import _short_repr

__all__ = [
    "CapacityFit",
    "NestedFit",
    "as_float_array",
    "householder",
    "nested_least_squares",
    "valid_prefix",
]


def as_float_array(value: Any, name: str, ndim: int) -> NDArray[np.float64]:
    """A float64 copy of ``value`` with ``ndim`` dimensions (1-D promoted to a column).

    Examples
    --------
    >>> as_float_array([1, 2], "x", 2).shape
    (2, 1)
    """
    if value is None or isinstance(value, (str, bytes)):
        raise TypeError(f"{name} must be an array of numbers; got {_short_repr(value)}.")
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
    fitted_residuals : ndarray of shape (n_capacities, n)
        ``y - fitted`` (observed minus fitted; an engine's :class:`~complexity._contract.Outcome`
        holds ``prediction - target`` under the name ``residuals``).
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
    fitted_residuals: NDArray[np.float64]
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

    def capacity(self, index: int) -> CapacityFit:
        """The small per-capacity part of the fit (no n-long arrays), e.g. to keep for later.

        Examples
        --------
        >>> Z = np.column_stack([np.ones(4), np.arange(4.0)])
        >>> part = nested_least_squares(Z, [1, 2, 2, 4], n_columns_per_capacity=[2]).capacity(0)
        >>> part.coef.round(6).tolist(), int(part.residual_dof)
        ([0.9, 0.9], 2)
        """
        k = self.n_columns[index]
        return CapacityFit(
            n_columns=k,
            coef=self.coef[index, :k].copy(),
            cov_factor=self.cov_factor[index, :k, :k].copy(),
            sigma2=float(self.sigma2[index]),
            residual_dof=int(self.residual_dof[index]),
        )

    @property
    def cov(self) -> NDArray[np.float64]:
        """Coefficient covariance ``sigma2_k F_k F_k^T``, shape (n_capacities, P, P).

        NaN for capacities without residual degrees of freedom (see :attr:`sigma2`).
        """
        ff = np.einsum("kij,klj->kil", self.cov_factor, self.cov_factor)
        return self.sigma2[:, None, None] * ff


@dataclass(frozen=True)
class CapacityFit:
    """One capacity of a :class:`NestedFit`: what its coefficients in user units need.

    Attributes
    ----------
    n_columns : int
        Leading design columns used (k).
    coef : ndarray of shape (k,)
        Coefficients on those columns.
    cov_factor : ndarray of shape (k, k)
        ``F`` with coefficient covariance ``sigma2 F F^T``.
    sigma2 : float
        ``RSS / (n - rank)``; NaN without residual degrees of freedom.
    residual_dof : int
        ``n - rank``.
    """

    n_columns: int
    coef: NDArray[np.float64]
    cov_factor: NDArray[np.float64]
    sigma2: float
    residual_dof: int


def _check_capacity_columns(n_columns_per_capacity: Any, n_design: int) -> tuple[int, ...]:
    if isinstance(n_columns_per_capacity, (str, bytes)) or not isinstance(
        n_columns_per_capacity, (Sequence, np.ndarray, range)
    ):
        raise TypeError(
            "n_columns_per_capacity must be a sequence of ints; "
            f"got {_short_repr(n_columns_per_capacity)}."
        )
    out = []
    for v in n_columns_per_capacity:
        if isinstance(v, (bool, np.bool_)) or not isinstance(v, numbers.Integral):
            raise TypeError(
                f"n_columns_per_capacity must hold ints; got {_short_repr(v)} "
                f"in {_short_repr(n_columns_per_capacity)}."
            )
        if not 1 <= int(v) <= n_design:
            raise ValueError(
                f"n_columns_per_capacity values must lie in 1..{n_design} (the design's column "
                f"count); got {int(v)}."
            )
        out.append(int(v))
    if not out:
        raise ValueError("n_columns_per_capacity is empty; give at least one capacity.")
    return tuple(out)


def householder(
    Z: NDArray[np.float64], y: NDArray[np.float64] | None = None
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64] | None]:
    """Householder QR of ``Z`` (n, P), no pivoting: ``(R, Q, z)``.

    ``R`` is (P, P) upper triangular, ``Q`` the thin (n, P) factor and ``z = Q^T y`` from the
    complete Q, applied without forming the n x n matrix (None when ``y`` is not given). No
    pivoting: it would reorder the columns and break the nesting of the capacities. This is
    the one QR of the package; the exact engine's reference factorisation uses it too.

    Examples
    --------
    >>> Z = np.column_stack([np.ones(3), [0.0, 1.0, 2.0]])
    >>> R, Q, z = householder(Z, np.array([1.0, 2.0, 4.0]))
    >>> np.allclose(Q @ R, Z), round(float(z[2] ** 2), 6)     # z[2]^2: the RSS of the line
    (True, 0.166667)
    """
    n, P = Z.shape
    (raw, tau), R = scipy.linalg.qr(Z, mode="raw")
    R = np.triu(R[:P, :P])
    lapack = scipy.linalg.lapack
    z = None
    if y is not None:
        lwork = int(lapack.dormqr("L", "T", raw, tau, y[:, None], lwork=-1)[1][0])
        zt, _, info = lapack.dormqr("L", "T", raw, tau, y[:, None].copy(), lwork=max(lwork, 1))
        if info != 0:  # pragma: no cover - LAPACK argument errors only
            raise RuntimeError(f"LAPACK dormqr failed with info={info}.")
        z = np.asarray(zt).ravel()
    eye = np.zeros((n, P))
    eye[np.arange(P), np.arange(P)] = 1.0
    lwork = int(lapack.dormqr("L", "N", raw, tau, eye, lwork=-1)[1][0])
    Q, _, info = lapack.dormqr("L", "N", raw, tau, eye, lwork=max(lwork, 1))
    if info != 0:  # pragma: no cover
        raise RuntimeError(f"LAPACK dormqr failed with info={info}.")
    return R, np.asarray(Q), z


def valid_prefix(r_diag: NDArray[np.float64], tol: float) -> int:
    """Number of leading columns before the first pivot below ``tol * max(previous pivots)``.

    Examples
    --------
    >>> valid_prefix(np.array([2.0, 1.0, 1e-20, 1.0]), 1e-12)
    2
    """
    a = np.abs(r_diag)
    ref = np.maximum.accumulate(a)
    bad = np.flatnonzero(~(a > tol * np.maximum(ref, np.finfo(np.float64).tiny)))
    return int(bad[0]) if bad.size else a.size


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
    Za = as_float_array(Z, "Z", 2)
    ya = as_float_array(y, "y", 1)
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
        raise ValueError(f"rank_tol must be a positive number; got {_short_repr(rank_tol)}.")

    R, Q, zy = householder(Za, ya)
    assert zy is not None
    z = zy
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
        fitted_residuals=ya[None, :] - fitted,
        rss=rss,
        leverage=leverage,
        residual_dof=dof,
        sigma2=sigma2,
        cov_factor=factor,
        r_diag=r_diag,
    )
