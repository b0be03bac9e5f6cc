"""Nearest-neighbour noise estimators for any number of predictors.

The first-neighbour form (``neighbour_variance``) and the Gamma-test intercept over several
neighbour orders (``neighbour_trend_variance``), on columns scaled to unit SD (METHODS.md 7.6).
The neighbours themselves come from ``_neighbours``.
"""

from __future__ import annotations

import math
import numbers
from typing import Any

import numpy as np
import scipy.sparse as sp
from numpy.typing import ArrayLike, NDArray

from ._neighbours import k_nearest, nearest_other
from ._noise_inputs import _as_design, _as_y, _finite, _quiet_overflow, _short_repr

__all__ = ["neighbour_trend_variance", "neighbour_variance"]

# Neighbour orders k = 1..K regressed in the Gamma test (our default; METHODS.md 7.6 names 10 as
# common). Measured on smooth truths at 2-10 predictors: K = 20 has a bias similar to K = 10 and
# a 20-40 % smaller spread; K = 40 starts to add bias.
_GAMMA_NEIGHBOURS = 20


def neighbour_variance(X: ArrayLike, y: ArrayLike) -> float:
    """Nearest-neighbour variance estimator for any number of predictors.

    Each column of ``X`` is scaled to unit standard deviation (constant columns are left as
    they are). With ``N(i)`` the nearest other row to row ``i`` (Euclidean distance)::

        sigma2 = (1 / (2 n)) sum_i (y_i - y_{N(i)})^2

    Unbiased when ``f`` is constant; otherwise biased upward by
    ``(1 / (2 n)) sum_i (f(x_i) - f(x_{N(i)}))^2``, a bias that shrinks slowly in many
    dimensions.

    Parameters
    ----------
    X : array-like of shape (n_samples, n_features) or (n_samples,)
        Predictors; a 1-D array is one predictor.
    y : array-like of shape (n_samples,)
        Responses.

    Returns
    -------
    float
        The estimate of ``sigma^2`` (>= 0). Needs at least 2 rows.

    Notes
    -----
    Ties are broken by the lowest row index: among the rows whose distance to row ``i`` is
    within a relative ``1e-9`` of the smallest, ``N(i)`` is the one with the lowest index.
    Duplicated rows are each other's neighbours (distance 0) and so act as pure error.

    Examples
    --------
    >>> neighbour_variance([0.0, 0.1, 1.0, 1.1], [1.0, 2.0, 5.0, 7.0])
    1.25
    >>> neighbour_variance([[0, 0], [0, 1], [5, 5], [5, 6]], [1.0, 1.0, 3.0, 5.0])
    1.0
    """
    Xa = _as_design(X, "X")
    ya = _as_y(y, Xa.shape[0])
    return _neighbours(Xa, ya)


def neighbour_trend_variance(
    X: ArrayLike, y: ArrayLike, *, n_neighbours: int = _GAMMA_NEIGHBOURS
) -> float:
    """Nearest-neighbour variance estimator with the trend of ``f`` regressed out (Gamma test).

    The first-neighbour estimator (``neighbour_variance``) is biased upward by half the mean
    squared change of ``f`` between neighbours. For smooth ``f`` that change grows in proportion
    to the squared neighbour distance, so the estimate is computed for the 1st, 2nd, ...,
    ``K``-th neighbour and extrapolated to distance zero. With ``N[i, k]`` the ``k``-th nearest
    other row to row ``i`` (after scaling each column to unit SD)::

        delta(k) = (1/n) sum_i ||x_{N[i,k]} - x_i||^2
        gamma(k) = (1/(2n)) sum_i (y_{N[i,k]} - y_i)^2
        gamma(k) = A delta(k) + Gamma    (least squares over k = 1..K)

    and the intercept ``Gamma`` estimates ``sigma^2`` (Stefansson, Koncar & Jones 1997;
    METHODS.md 7.6).

    Parameters
    ----------
    X : array-like of shape (n_samples, n_features) or (n_samples,)
        Predictors; a 1-D array is one predictor.
    y : array-like of shape (n_samples,)
        Responses.
    n_neighbours : int, default=20
        The number ``K`` of neighbour orders in the regression (at most ``n_samples - 1`` are
        used). Larger ``K`` lowers the variance but reaches farther neighbours, where the
        straight-line relation between ``gamma`` and ``delta`` holds less well.

    Returns
    -------
    float
        The estimate of ``sigma^2`` (>= 0; a negative intercept is returned as 0). Needs at
        least 2 rows.

    Notes
    -----
    **What it assumes.** ``f`` is smooth (so the mean squared change of ``f`` between a point
    and its ``k``-th neighbour is about proportional to ``delta(k)``); the noise is
    homoscedastic (otherwise the average of ``sigma^2(x)`` is estimated); the columns are on
    comparable scales once each is scaled to unit SD (an irrelevant or badly scaled column
    spoils the neighbours); and ``n`` is large enough for the dimension that the ``K``-th
    neighbour is still close, as the extrapolation runs from ``delta(1)..delta(K)`` down to 0.
    Measured on smooth truths with noise a fifth of the variance of ``y``, its relative bias
    was within a few per cent at 2 and 5 predictors and about 15 % at 10 predictors with
    ``n = 500``, where the first-neighbour estimator was biased upward by about 100 %.

    **Exactness.** The intercept is a fixed combination ``sum_k c_k gamma(k)`` with
    ``sum_k c_k = 1`` (the weights depend on the distances only), so the estimator is exactly
    unbiased when ``f`` is constant, adding a constant to ``y`` changes nothing, and scaling
    ``y`` by ``c`` scales it by ``c^2``. With one neighbour order (``n = 2`` or
    ``n_neighbours=1``), or when every ``delta(k)`` is equal (for instance when every row has at
    least ``K`` identical copies), it is the mean of the ``gamma(k)``.

    **Neighbours.** Distances are squared Euclidean distances of the scaled rows, computed from
    the coordinate differences; equal distances are ordered by the lowest row index, so the
    result is deterministic. The search is exact: a k-d tree for a few columns, blocked
    matrix products (about ``n^2 p`` operations, a few seconds at ``n = 20000`` and ``p = 50``
    on two cores) for more, the candidates' distances recomputed from the differences either
    way (``complexity._neighbours``).

    See Also
    --------
    neighbour_variance : the first-neighbour estimator (exact toy values, larger bias).
    estimate_noise : uses this estimator for several predictors.

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(1)
    >>> X = rng.normal(size=(1000, 5))
    >>> y = np.sin(X).sum(axis=1) + rng.normal(0.0, 0.5, 1000)  # sigma^2 = 0.25
    >>> round(neighbour_trend_variance(X, y), 2), round(neighbour_variance(X, y), 2)
    (0.25, 0.38)
    >>> neighbour_trend_variance([[0.0, 1.0], [2.0, 3.0], [5.0, 1.0]], [4.0, 4.0, 4.0])
    0.0
    """
    Xa = _as_design(X, "X")
    ya = _as_y(y, Xa.shape[0])
    k = _check_neighbours(n_neighbours)
    return _gamma(Xa, ya, k)[0]


def _check_neighbours(n_neighbours: Any) -> int:
    if isinstance(n_neighbours, bool | np.bool_) or not isinstance(n_neighbours, numbers.Integral):
        raise TypeError(
            "n_neighbours must be an int >= 1 (neighbour orders in the Gamma-test regression); "
            f"got {_short_repr(n_neighbours)}."
        )
    if int(n_neighbours) < 1:
        raise ValueError(
            f"n_neighbours must be an int >= 1 (neighbour orders in the Gamma-test regression); "
            f"got {int(n_neighbours)!r}."
        )
    return int(n_neighbours)


def _scale_columns(X: NDArray[np.float64]) -> NDArray[np.float64]:
    centred = X - X.mean(axis=0)
    sd = centred.std(axis=0)
    sd[np.ptp(X, axis=0) == 0] = 1.0
    if not np.all(np.isfinite(sd)) or not np.all(np.isfinite(centred)):
        raise ValueError("X has values too large to scale (overflow); rescale X first.")
    return centred / sd


def _neighbours(X: NDArray[np.float64], y: NDArray[np.float64]) -> float:
    return _neighbours_and_pairs(X, y)[0]


def _neighbours_with_df(X: NDArray[np.float64], y: NDArray[np.float64]) -> tuple[float, float]:
    value, nbr = _neighbours_and_pairs(X, y)
    return value, _pair_form_df(nbr[:, None], np.ones(1))


@_quiet_overflow
def _neighbours_and_pairs(
    X: NDArray[np.float64], y: NDArray[np.float64]
) -> tuple[float, NDArray[np.intp]]:
    """First-neighbour estimate and each row's neighbour (one search for both)."""
    n = X.shape[0]
    if n < 2:
        raise ValueError(f"neighbour_variance needs at least 2 rows; got {n}.")
    nbr = nearest_other(_scale_columns(X))
    d = y - y[nbr]
    return _finite(float(d @ d) / (2.0 * n), "neighbour_variance"), nbr


def _pair_form(idx: NDArray[np.intp], c: NDArray[np.float64]) -> sp.csr_matrix:
    """Sparse ``A`` of ``y^T A y = (1/(2n)) sum_i sum_k c_k (y_i - y_idx[i,k])^2``."""
    n, k = idx.shape
    rows = np.repeat(np.arange(n), k)
    cols = idx.ravel()
    w = np.tile(c, n) / (2.0 * n)
    A = sp.coo_matrix(
        (np.r_[w, w, -w, -w], (np.r_[rows, cols, rows, cols], np.r_[rows, cols, cols, rows])),
        shape=(n, n),
    ).tocsr()
    A.sum_duplicates()
    return A


def _pair_form_df(idx: NDArray[np.intp], c: NDArray[np.float64]) -> float:
    """Effective df ``1 / tr(A^2)`` of the pair form ``A`` (see ``_pair_form``)."""
    A = _pair_form(idx, c)
    trace_sq = float(A.data @ A.data)
    return 1.0 / trace_sq if trace_sq > 0 else math.inf


@_quiet_overflow
def _gamma(
    X: NDArray[np.float64], y: NDArray[np.float64], k: int
) -> tuple[float, float, int, bool, float]:
    """Gamma-test intercept (clipped at 0), effective df, orders used, clipped?, standard error."""
    n = X.shape[0]
    if n < 2:
        raise ValueError(f"neighbour_trend_variance needs at least 2 rows; got {n}.")
    k = min(k, n - 1)
    d2, idx = k_nearest(_scale_columns(X), k)
    delta = d2.mean(axis=0)
    diff = y[idx] - y[:, None]
    gam = np.einsum("ik,ik->k", diff, diff) / (2.0 * n)
    centred = delta - delta.mean()
    spread = float(centred @ centred)
    if k >= 2 and spread > (1e-12 * float(np.max(np.abs(delta)))) ** 2 * k:
        c = 1.0 / k - delta.mean() * centred / spread  # least-squares intercept weights
    else:
        c = np.full(k, 1.0 / k)
    value = _finite(float(c @ gam), "neighbour_trend_variance")
    A = _pair_form(idx, c)
    trace_sq = float(A.data @ A.data)
    df_eff = 1.0 / trace_sq if trace_sq > 0 else math.inf
    # Var(y^T A y) = 2 sigma^4 tr(A^2) + 4 sigma^2 ||A f||^2 for Gaussian noise, and
    # E ||A y||^2 = ||A f||^2 + sigma^2 tr(A^2): the trend term is estimated by plug-in.
    level = max(value, 0.0) if value > 0 else max(float(gam[0]), 0.0)
    Ay = A @ y
    trend = max(float(Ay @ Ay) - level * trace_sq, 0.0)
    se = math.sqrt(2.0 * level**2 * trace_sq + 4.0 * level * trend)
    return max(value, 0.0), df_eff, k, value < 0, se
