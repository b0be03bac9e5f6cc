"""Difference-based noise estimators for one ordered predictor.

Pseudo-residuals of Gasser, Sroka & Jennen-Steinmetz (``difference_variance``), first
differences of Rice (``rice_variance``) and the optimal difference sequences of Hall, Kay &
Titterington (``optimal_difference_variance``); formulas in METHODS.md 7.5.
"""

from __future__ import annotations

import math
import numbers
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ._noise_inputs import _as_x, _as_y, _finite, _quiet_overflow, _short_repr
from ._noise_replicates import _group_means

__all__ = ["difference_variance", "optimal_difference_variance", "rice_variance"]

# Optimal difference sequences of Hall, Kay & Titterington (1990): sum d = 0, sum d^2 = 1 and
# every lag-l autocorrelation rho_l = -1/(2m). Order 2 is the closed form
# ((1 + sqrt 5)/4, -1/2, (1 - sqrt 5)/4); order 3 was solved numerically from those conditions,
# starting from the tabled values 0.1942, 0.2809, 0.3832, -0.8582 (METHODS.md 7.5).
_HKT_WEIGHTS: dict[int, tuple[float, ...]] = {
    1: (math.sqrt(0.5), -math.sqrt(0.5)),
    2: ((1.0 + math.sqrt(5.0)) / 4.0, -0.5, (1.0 - math.sqrt(5.0)) / 4.0),
    3: (0.19419532489953853, 0.28089215633162196, 0.3831549442900873, -0.8582424255212477),
}


def difference_variance(x: ArrayLike, y: ArrayLike) -> float:
    """Pseudo-residual variance estimator of Gasser, Sroka & Jennen-Steinmetz (1986).

    For one predictor, sorted by ``x``, each interior point is compared with the straight line
    through its two neighbours::

        a_i = (x_{i+1} - x_i) / (x_{i+1} - x_{i-1}),   b_i = 1 - a_i
        e_i = a_i y_{i-1} + b_i y_{i+1} - y_i,         c_i^2 = 1 / (a_i^2 + b_i^2 + 1)
        sigma2 = mean over i of c_i^2 e_i^2

    The estimator is exactly unbiased whenever ``f`` is linear, for any spacing of ``x``.

    Parameters
    ----------
    x : array-like of shape (n_samples,) or (n_samples, 1)
        One predictor, in any order and any spacing.
    y : array-like of shape (n_samples,)
        Responses.

    Returns
    -------
    float
        The estimate of ``sigma^2`` (>= 0).

    Notes
    -----
    **Ties in x** (our own choice). The formula needs ``x_{i+1} != x_{i-1}``. Rows with equal
    ``x`` are therefore replaced by their group mean, and the formula runs on the sorted
    distinct values ``x_(1) < ... < x_(m)``. A mean of ``n_j`` rows has variance
    ``sigma^2 / n_j``, so the weights become::

        c_i^2 = 1 / (a_i^2 / n_{i-1} + b_i^2 / n_{i+1} + 1 / n_i)

    Each ``c_i^2 e_i^2`` stays exactly unbiased for linear ``f``, and without ties this is the
    formula above. The spread inside a tied group is not used here; ``replicate_variance``
    measures it. At least 3 distinct ``x`` values are needed.

    See Also
    --------
    rice_variance, optimal_difference_variance : estimators that remove constants only.

    Examples
    --------
    >>> round(difference_variance([1, 2, 3, 4, 5], [1, 3, 2, 5, 4]), 6)  # 41/18
    2.277778
    >>> x = [0.0, 0.3, 1.0, 1.1, 1.1, 4.0]  # uneven, with a tie; y on a line: zero
    >>> round(difference_variance(x, [2.0, 2.6, 4.0, 4.2, 4.2, 10.0]), 12)
    0.0
    """
    xa = _as_x(x)
    ya = _as_y(y, xa.shape[0])
    return _gsj(xa, ya)


def rice_variance(x: ArrayLike, y: ArrayLike) -> float:
    """First-difference variance estimator of Rice (1984).

    After sorting by ``x`` (stable sort: tied ``x`` keep their input order)::

        sigma2 = (1 / (2 (n - 1))) sum_{i=1}^{n-1} (y_{i+1} - y_i)^2

    It is unbiased when ``f`` is constant; otherwise it is biased upward by
    ``(1 / (2 (n - 1))) sum (f(x_{i+1}) - f(x_i))^2``. Only the order of ``x`` is used.

    Parameters
    ----------
    x : array-like of shape (n_samples,) or (n_samples, 1)
        One predictor.
    y : array-like of shape (n_samples,)
        Responses.

    Returns
    -------
    float
        The estimate of ``sigma^2`` (>= 0). Needs at least 2 points.

    See Also
    --------
    optimal_difference_variance : order 1 equals this estimator.

    Examples
    --------
    >>> rice_variance([1, 2, 3, 4, 5], [1, 3, 2, 5, 4])
    1.875
    """
    xa = _as_x(x)
    ya = _as_y(y, xa.shape[0])
    return _difference_sequence(xa, ya, 1, "rice_variance")


def optimal_difference_variance(x: ArrayLike, y: ArrayLike, order: int = 2) -> float:
    """Optimal difference-sequence estimator of Hall, Kay & Titterington (1990).

    After sorting by ``x`` (stable sort), with the order-``m`` sequence ``d_0..d_m``
    (``sum d_j = 0``, ``sum d_j^2 = 1``)::

        sigma2_m = (1 / (n - m)) sum_{k=1}^{n-m} (sum_{j=0}^{m} d_j y_{k+j})^2

    The sequence minimises the asymptotic variance: with iid errors,
    ``n Var(sigma2_m) -> mu4 - sigma^4 + 4 delta sigma^4`` where ``delta = 1/(4m)``.

    Parameters
    ----------
    x : array-like of shape (n_samples,) or (n_samples, 1)
        One predictor; only its order is used.
    y : array-like of shape (n_samples,)
        Responses.
    order : {1, 2, 3}, default=2
        The order ``m``. Order 1 equals ``rice_variance``. Higher orders have smaller variance
        but more bias when ``f`` is not constant.

    Returns
    -------
    float
        The estimate of ``sigma^2`` (>= 0). Needs at least ``order + 1`` points.

    Notes
    -----
    The sequences used are ``(1, -1)/sqrt 2``, ``((1 + sqrt 5)/4, -1/2, (1 - sqrt 5)/4)`` and
    ``(0.194195, 0.280892, 0.383155, -0.858242)``, all with ``rho_l = -1/(2m)`` for every lag.

    Examples
    --------
    >>> round(optimal_difference_variance([1, 2, 3, 4, 5], [1, 3, 2, 5, 4], order=2), 6)
    2.071175
    >>> optimal_difference_variance([1, 2, 3], [7.0, 7.0, 7.0], order=1)
    0.0
    """
    xa = _as_x(x)
    ya = _as_y(y, xa.shape[0])
    m = _check_order(order)
    return _difference_sequence(xa, ya, m, "optimal_difference_variance")


def _check_order(order: Any) -> int:
    if isinstance(order, bool | np.bool_) or not isinstance(order, numbers.Integral):
        raise TypeError(f"order must be an int in 1, 2, 3; got {_short_repr(order)}.")
    if int(order) not in _HKT_WEIGHTS:
        raise ValueError(f"order must be 1, 2 or 3; got {int(order)!r}.")
    return int(order)


@_quiet_overflow
def _gsj_with_df(x: NDArray[np.float64], y: NDArray[np.float64]) -> tuple[float, float]:
    """GSJ estimate and its effective df ``N^2 / ||M||_F^2`` (``M``: pseudo-residual correlations)."""
    xs, inverse, counts = np.unique(x, return_inverse=True, return_counts=True)
    inverse = inverse.reshape(-1)
    if xs.size < 3:
        raise ValueError(
            "difference_variance needs at least 3 distinct x values (each interior point is "
            f"compared with its two neighbours); got {xs.size} distinct among {x.size} points."
        )
    ybar = _group_means(y, inverse, counts)
    h_left = xs[1:-1] - xs[:-2]
    h_right = xs[2:] - xs[1:-1]
    a = h_right / (h_left + h_right)
    b = 1.0 - a
    # a y_{i-1} + b y_{i+1} - y_i, written with differences so constants cancel exactly
    e = a * (ybar[:-2] - ybar[1:-1]) + b * (ybar[2:] - ybar[1:-1])
    w = 1.0 / (a**2 / counts[:-2] + b**2 / counts[2:] + 1.0 / counts[1:-1])
    value = _finite(float(np.mean(w * e**2)), "difference_variance")
    # The unit-variance pseudo-residuals r_i = sqrt(w_i) e_i share group means with r_{i+1} and
    # r_{i+2} only (a mean of n_j rows has variance sigma^2 / n_j), which gives their
    # correlations at lags 1 and 2 below; sigma2 = (1/N) sum r_i^2, so tr(A^2) = ||M||_F^2 / N^2.
    root = np.sqrt(w)
    lag1 = root[:-1] * root[1:] * (-a[1:] / counts[1:-2] - b[:-1] / counts[2:-1])
    lag2 = root[:-2] * root[2:] * b[:-2] * a[2:] / counts[2:-2]
    size = float(w.size)
    frob = size + 2.0 * float(lag1 @ lag1) + 2.0 * float(lag2 @ lag2)
    return value, size**2 / frob


def _gsj(x: NDArray[np.float64], y: NDArray[np.float64]) -> float:
    return _gsj_with_df(x, y)[0]


@_quiet_overflow
def _difference_sequence(x: NDArray[np.float64], y: NDArray[np.float64], m: int, who: str) -> float:
    n = x.size
    if n < m + 1:
        what = "rice_variance" if who == "rice_variance" else f"{who} of order {m}"
        raise ValueError(f"{what} needs at least {m + 1} points; got {n}.")
    ys = y[np.argsort(x, kind="stable")]
    ys = ys - ys.mean()  # sum d = 0, so centring changes nothing but rounding
    if m == 1:  # exactly Rice's (1/(2(n-1))) sum (y_{i+1} - y_i)^2
        diff = np.diff(ys)
        return _finite(float(diff @ diff) / (2.0 * (n - 1)), who)
    z = np.zeros(n - m)
    for j, dj in enumerate(_HKT_WEIGHTS[m]):
        z += dj * ys[j : n - m + j]
    return _finite(float(z @ z) / (n - m), who)
