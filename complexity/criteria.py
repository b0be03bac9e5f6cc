"""Closed-form model-selection criteria for least-squares ladders, for every capacity at once.

All functions are pure and vectorised over capacities: ``rss`` and ``n_params`` are arrays with
one entry per capacity, ``residuals`` and ``leverage`` have shape (n_capacities, n_samples).

Convention (one, used everywhere; METHODS.md section 6): the Gaussian log-likelihood is the full
profile likelihood ``llf = -(n/2) [log(2 pi) + log(RSS/n) + 1]``, the parameter count ``p`` is
the rank of the design (intercept included), and the noise variance is NOT counted. These are
the values of statsmodels ``OLS(...).fit().aic`` / ``.bic`` and of its ``info_criteria('aicc')``.
Only differences between capacities matter; the absolute level depends on the convention.

Undefined values are never NaN: a criterion that cannot be computed is ``+inf`` (so no rule picks
that capacity) and the reason is documented per function. ``RSS = 0`` (an exact fit) gives
``aic = bic = aicc = -inf`` as in statsmodels.
"""

from __future__ import annotations

import numbers
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "aic",
    "aicc",
    "bic",
    "criteria_table",
    "fixed_design_variance",
    "gaussian_loglik",
    "gcv",
    "loocv",
    "loocv_defined",
    "mallows_cp",
    "noise_variance_from_largest",
]

#: leverage above ``1 - LEVERAGE_TOL`` means the point is interpolated: leave-one-out undefined
LEVERAGE_TOL = 1e-10


def _short(value: Any, limit: int = 80) -> str:
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 3] + "..."


def _check_n(n: Any) -> int:
    if isinstance(n, bool) or not isinstance(n, numbers.Integral):
        raise TypeError(f"n must be an int (the number of observations); got {_short(n)}.")
    if n < 1:
        raise ValueError(f"n must be >= 1; got {int(n)}.")
    return int(n)


def _vector(value: ArrayLike, name: str) -> NDArray[np.float64]:
    arr = np.atleast_1d(np.asarray(value, dtype=np.float64))
    if arr.ndim != 1:
        raise ValueError(f"{name} must be 1-D (one value per capacity); got shape {arr.shape}.")
    if np.isnan(arr).any():
        raise ValueError(f"{name} contains NaN; got {_short(arr)}.")
    return arr


def _rss_p(rss: ArrayLike, n_params: ArrayLike, n: int) -> tuple[NDArray, NDArray]:
    r = _vector(rss, "rss")
    p = _vector(n_params, "n_params")
    if r.shape != p.shape:
        raise ValueError(f"rss and n_params must have the same length; got {r.size} and {p.size}.")
    if (r < 0).any():
        raise ValueError(f"rss must be >= 0; got {_short(r)}.")
    if (p < 0).any() or (p > n).any():
        raise ValueError(f"n_params must lie in 0..n={n}; got {_short(p)}.")
    return r, p


def gaussian_loglik(rss: ArrayLike, n: int) -> NDArray[np.float64]:
    """Maximised Gaussian log-likelihood ``-(n/2) [log(2 pi) + log(RSS/n) + 1]``.

    Parameters
    ----------
    rss : array-like of shape (n_capacities,)
        Residual sums of squares.
    n : int
        Number of observations.

    Returns
    -------
    ndarray of shape (n_capacities,)
        ``+inf`` where ``RSS = 0``.

    Examples
    --------
    >>> gaussian_loglik([3.6], 5).round(6)          # METHODS.md section 6 worked check
    array([-6.273432])
    """
    n = _check_n(n)
    r = _vector(rss, "rss")
    if (r < 0).any():
        raise ValueError(f"rss must be >= 0; got {_short(r)}.")
    with np.errstate(divide="ignore"):
        return -(n / 2.0) * (np.log(2 * np.pi) + np.log(r / n) + 1.0)


def aic(rss: ArrayLike, n_params: ArrayLike, n: int) -> NDArray[np.float64]:
    """Akaike information criterion ``-2 llf + 2 p`` (statsmodels OLS ``.aic``).

    Parameters
    ----------
    rss : array-like of shape (n_capacities,)
    n_params : array-like of shape (n_capacities,)
        Rank of each design, intercept included.
    n : int

    Returns
    -------
    ndarray of shape (n_capacities,)

    Examples
    --------
    >>> aic([3.6], [2], 5).round(6)
    array([16.546865])
    """
    n = _check_n(n)
    r, p = _rss_p(rss, n_params, n)
    return -2.0 * gaussian_loglik(r, n) + 2.0 * p


def bic(rss: ArrayLike, n_params: ArrayLike, n: int) -> NDArray[np.float64]:
    """Schwarz's Bayesian information criterion ``-2 llf + p log n`` (statsmodels ``.bic``).

    Examples
    --------
    >>> bic([3.6], [2], 5).round(6)
    array([15.765741])
    """
    n = _check_n(n)
    r, p = _rss_p(rss, n_params, n)
    return -2.0 * gaussian_loglik(r, n) + p * np.log(n)


def aicc(rss: ArrayLike, n_params: ArrayLike, n: int) -> NDArray[np.float64]:
    """Small-sample AIC ``-2 llf + 2 p n / (n - p - 1)``.

    The form of statsmodels ``info_criteria('aicc')`` (p = rank, sigma^2 not counted).
    ``+inf`` where ``n - p - 1 <= 0`` (undefined), as statsmodels returns, even when RSS = 0.

    Examples
    --------
    >>> aicc([3.6, 1.0], [2, 4], 5).round(6)
    array([22.546865,       inf])
    """
    n = _check_n(n)
    r, p = _rss_p(rss, n_params, n)
    room = n - p - 1.0
    ok = room > 0
    pen = 2.0 * p * n / np.where(ok, room, 1.0)
    # undefined (n - p - 1 <= 0) wins over an exact fit's -inf likelihood term
    return np.where(ok, -2.0 * gaussian_loglik(r, n) + pen, np.inf)


def gcv(rss: ArrayLike, n_params: ArrayLike, n: int) -> NDArray[np.float64]:
    """Generalised cross-validation ``n RSS / (n - p)^2`` (Craven & Wahba 1979).

    ``+inf`` where ``p = n`` (saturated fit).

    Examples
    --------
    >>> gcv([3.6], [2], 5)           # METHODS.md section 5 worked check
    array([2.])
    """
    n = _check_n(n)
    r, p = _rss_p(rss, n_params, n)
    room = n - p
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(room > 0, n * r / np.where(room > 0, room, 1.0) ** 2, np.inf)


def _leverage_residuals(residuals: ArrayLike, leverage: ArrayLike) -> tuple[NDArray, NDArray]:
    e = np.asarray(residuals, dtype=np.float64)
    h = np.asarray(leverage, dtype=np.float64)
    if e.ndim == 1:
        e = e[None, :]
    if h.ndim == 1:
        h = h[None, :]
    if e.shape != h.shape or e.ndim != 2:
        raise ValueError(
            "residuals and leverage must have the same shape (n_capacities, n_samples); "
            f"got {e.shape} and {h.shape}."
        )
    if np.isnan(e).any() or np.isnan(h).any():
        raise ValueError("residuals or leverage contain NaN.")
    if (h < -1e-12).any() or (h > 1 + 1e-12).any():
        raise ValueError(f"leverage values must lie in [0, 1]; got {_short(h)}.")
    return e, h


def loocv_defined(leverage: ArrayLike, *, tol: float = LEVERAGE_TOL) -> NDArray[np.bool_]:
    """False for capacities where some point has leverage ``> 1 - tol`` (interpolated).

    Examples
    --------
    >>> loocv_defined([[0.5, 0.5], [1.0, 1.0]])
    array([ True, False])
    """
    h = np.asarray(leverage, dtype=np.float64)
    h = h[None, :] if h.ndim == 1 else h
    return ~(h > 1.0 - tol).any(axis=1)


def loocv(residuals: ArrayLike, leverage: ArrayLike, *, tol: float = LEVERAGE_TOL) -> NDArray:
    """Leave-one-out mean squared error from one fit: ``PRESS / n`` (Allen 1974).

    ``PRESS = sum_i (e_i / (1 - h_ii))^2``, exact for least squares (METHODS.md section 5).

    Parameters
    ----------
    residuals : array-like of shape (n_capacities, n_samples)
        Training residuals ``y - fitted``.
    leverage : array-like of shape (n_capacities, n_samples)
        Hat-matrix diagonals.
    tol : float, default=1e-10
        A capacity with some ``h_ii > 1 - tol`` interpolates that point: leave-one-out is
        undefined there and the value is ``+inf`` (see :func:`loocv_defined`).

    Returns
    -------
    ndarray of shape (n_capacities,)

    Examples
    --------
    >>> e = [-0.4, 0.8, -1.0, 1.2, -0.6]
    >>> h = [0.6, 0.3, 0.2, 0.3, 0.6]
    >>> (5 * loocv(e, h)).round(6)    # PRESS, METHODS.md section 5
    array([9.057398])
    """
    e, h = _leverage_residuals(residuals, leverage)
    ok = loocv_defined(h, tol=tol)
    safe = np.where(ok[:, None], 1.0 - h, 1.0)
    value = np.mean((e / safe) ** 2, axis=1)
    return np.where(ok, value, np.inf)


def noise_variance_from_largest(rss: ArrayLike, n_params: ArrayLike, n: int) -> float:
    """``RSS / (n - p)`` of the largest model that leaves residual degrees of freedom.

    The usual noise estimate for Mallows' Cp. Raises ``ValueError`` if no model has ``n > p`` or
    if that model fits exactly (the estimate would be 0).

    Examples
    --------
    >>> round(noise_variance_from_largest([3.6, 3.314286], [2, 3], 5), 6)
    1.657143
    """
    n = _check_n(n)
    r, p = _rss_p(rss, n_params, n)
    usable = np.flatnonzero(p < n)
    if usable.size == 0:
        raise ValueError(
            f"no capacity leaves residual degrees of freedom (every n_params equals n = {n}); "
            "pass the noise variance explicitly (sigma2=...)."
        )
    k = usable[np.argmax(p[usable])]
    value = float(r[k] / (n - p[k]))
    if not value > 0:
        raise ValueError(
            f"the largest usable model (n_params = {int(p[k])}) fits exactly (RSS = 0), so it "
            "gives no noise estimate; pass the noise variance explicitly (sigma2=...)."
        )
    return value


def _check_sigma2(sigma2: Any) -> float:
    if isinstance(sigma2, bool) or not isinstance(sigma2, numbers.Real):
        raise TypeError(f"sigma2 must be a positive number; got {_short(sigma2)}.")
    if not (np.isfinite(sigma2) and sigma2 > 0):
        raise ValueError(f"sigma2 must be a finite number > 0; got {sigma2!r}.")
    return float(sigma2)


def mallows_cp(
    rss: ArrayLike, n_params: ArrayLike, n: int, *, sigma2: float | None = None
) -> NDArray[np.float64]:
    """Mallows' ``Cp = RSS_p / sigma2 - n + 2 p``.

    Parameters
    ----------
    rss, n_params : array-like of shape (n_capacities,)
    n : int
    sigma2 : float, optional
        Noise variance. Default: :func:`noise_variance_from_largest` (``RSS/(n - p)`` of the
        largest model), so that ``Cp = p`` exactly for that model.

    Returns
    -------
    ndarray of shape (n_capacities,)

    Examples
    --------
    >>> mallows_cp([3.6, 3.3142857142857], [2, 3], 5).round(6)   # METHODS.md section 6
    array([1.172414, 3.      ])
    """
    n = _check_n(n)
    r, p = _rss_p(rss, n_params, n)
    s2 = noise_variance_from_largest(r, p, n) if sigma2 is None else _check_sigma2(sigma2)
    return r / s2 - n + 2.0 * p


def fixed_design_variance(n_params: ArrayLike, n: int, sigma2: float) -> NDArray[np.float64]:
    """Average variance of fitted values over a fixed design, ``sigma2 p / n``.

    For least squares, ``(1/n) sum_i Var(yhat_i) = sigma^2 tr(H) / n = sigma^2 p / n``.

    Examples
    --------
    >>> fixed_design_variance([1, 2, 3], 5, 1.5)
    array([0.3, 0.6, 0.9])
    """
    n = _check_n(n)
    p = _vector(n_params, "n_params")
    return _check_sigma2(sigma2) * p / n


def criteria_table(
    residuals: ArrayLike,
    leverage: ArrayLike,
    n_params: ArrayLike,
    *,
    capacities: ArrayLike | None = None,
    sigma2: float | None = None,
    rss: ArrayLike | None = None,
) -> pd.DataFrame:
    """Every criterion for every capacity, as a DataFrame indexed by ``capacity``.

    Parameters
    ----------
    residuals : array-like of shape (n_capacities, n_samples)
        Training residuals of each capacity.
    leverage : array-like of shape (n_capacities, n_samples)
        Hat-matrix diagonals.
    n_params : array-like of shape (n_capacities,)
        Rank of each design.
    capacities : array-like, optional
        Index values (default 0, 1, ...).
    sigma2 : float, optional
        Noise variance for ``cp`` and ``fixed_design_variance`` (default: from the largest
        model, :func:`noise_variance_from_largest`).
    rss : array-like of shape (n_capacities,), optional
        Residual sums of squares if computed more accurately elsewhere (e.g. tail sums of a QR);
        default ``sum(residuals**2)``.

    Returns
    -------
    pandas.DataFrame
        Columns ``n_params, rss, loocv, loocv_defined, gcv, aic, aicc, bic, cp,
        fixed_design_variance``; ``attrs["sigma2"]`` holds the noise variance used.

    Examples
    --------
    >>> import numpy as np
    >>> from complexity.engine.linear import nested_least_squares
    >>> x = np.arange(5.0)
    >>> fit = nested_least_squares(np.column_stack([np.ones(5), x, x**2]), [1, 3, 2, 5, 4],
    ...                            n_columns_per_capacity=[1, 2, 3])
    >>> t = criteria_table(fit.residuals, fit.leverage, fit.rank, rss=fit.rss)
    >>> t["gcv"].round(4).tolist()
    [3.125, 2.0, 4.1429]
    >>> t["cp"].round(4).tolist()
    [3.0345, 1.1724, 3.0]
    """
    e, h = _leverage_residuals(residuals, leverage)
    n = e.shape[1]
    p = _vector(n_params, "n_params")
    if p.size != e.shape[0]:
        raise ValueError(
            f"n_params has {p.size} entries but residuals has {e.shape[0]} capacities."
        )
    r = np.sum(e**2, axis=1) if rss is None else _vector(rss, "rss")
    if r.size != p.size:
        raise ValueError(f"rss has {r.size} entries but there are {p.size} capacities.")
    s2 = noise_variance_from_largest(r, p, n) if sigma2 is None else _check_sigma2(sigma2)
    index = pd.Index(
        np.arange(p.size) if capacities is None else np.asarray(capacities), name="capacity"
    )
    if len(index) != p.size:
        raise ValueError(f"capacities has {len(index)} entries but there are {p.size} capacities.")
    table = pd.DataFrame(
        {
            "n_params": p.astype(int),
            "rss": r,
            "loocv": loocv(e, h),
            "loocv_defined": loocv_defined(h),
            "gcv": gcv(r, p, n),
            "aic": aic(r, p, n),
            "aicc": aicc(r, p, n),
            "bic": bic(r, p, n),
            "cp": mallows_cp(r, p, n, sigma2=s2),
            "fixed_design_variance": fixed_design_variance(p, n, s2),
        },
        index=index,
    )
    table.attrs["sigma2"] = s2
    return table
