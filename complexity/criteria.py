"""Closed-form model-selection criteria for least-squares ladders, for every capacity at once.

All functions are pure and vectorised over capacities: ``rss`` and ``n_params`` are arrays with
one entry per capacity, ``residuals`` and ``leverage`` have shape (n_capacities, n_samples).

Conventions (METHODS.md §6). The Gaussian log-likelihood is the full profile likelihood
``llf = -(n/2) [log(2 pi) + log(RSS/n) + 1]`` and the parameter count ``p`` is the rank of the
design (intercept included). AIC and BIC do not count the noise variance: they are the values of
statsmodels ``OLS(...).fit().aic`` / ``.bic``. AICc is the regression form of its source, Hurvich &
Tsai (1989), ``n log(RSS/n) + n (n + p) / (n - p - 2)``: it counts the noise variance (``k = p + 1``)
and drops the constant ``n log(2 pi)``. Only differences between capacities matter, and only
within one criterion; the absolute level depends on the convention.

Undefined values are never NaN: a criterion that cannot be computed is ``+inf`` (so no rule picks
that capacity) and the reason is documented per function. ``RSS = 0`` (an exact fit) gives
``aic = bic = aicc = -inf`` in the single-criterion functions, as in statsmodels.

Exact fits. Computed in floating point, the RSS of a model that fits the data exactly is not 0 but
rounding noise, and the criteria would rank that noise (every criterion then favours the largest
capacity). :func:`criteria_table`, given ``y``, counts an RSS at or below the rounding level of
:func:`rounding_level_rss` as zero: it flags the capacity in the ``exact_fit`` column and
evaluates every criterion there at the rounding level itself, the largest RSS that rounding alone
can produce. The penalties then decide among the exact capacities, and the simplest one wins.
"""

from __future__ import annotations

import numbers
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike, NDArray

from ._validation import _short_repr

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
    "rounding_level_rss",
]

#: leverage above ``1 - LEVERAGE_TOL`` means the point is interpolated: leave-one-out undefined
LEVERAGE_TOL = 1e-10

_EPS = float(np.finfo(np.float64).eps)


def _check_n(n: Any) -> int:
    if isinstance(n, bool) or not isinstance(n, numbers.Integral):
        raise TypeError(f"n must be an int (the number of observations); got {_short_repr(n)}.")
    if n < 1:
        raise ValueError(f"n must be >= 1; got {int(n)}.")
    return int(n)


def _vector(value: ArrayLike, name: str) -> NDArray[np.float64]:
    arr = np.atleast_1d(np.asarray(value, dtype=np.float64))
    if arr.ndim != 1:
        raise ValueError(f"{name} must be 1-D (one value per capacity); got shape {arr.shape}.")
    if np.isnan(arr).any():
        raise ValueError(f"{name} contains NaN; got {_short_repr(arr)}.")
    return arr


def _rss_p(rss: ArrayLike, n_params: ArrayLike, n: int) -> tuple[NDArray, NDArray]:
    r = _vector(rss, "rss")
    p = _vector(n_params, "n_params")
    if r.shape != p.shape:
        raise ValueError(f"rss and n_params must have the same length; got {r.size} and {p.size}.")
    if (r < 0).any():
        raise ValueError(f"rss must be >= 0; got {_short_repr(r)}.")
    if (p < 0).any() or (p > n).any():
        raise ValueError(f"n_params must lie in 0..n={n}; got {_short_repr(p)}.")
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
        raise ValueError(f"rss must be >= 0; got {_short_repr(r)}.")
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
    """Small-sample AIC of Hurvich & Tsai (1989), ``n log(RSS/n) + n (n + p) / (n - p - 2)``.

    The regression form of METHODS.md §6. It counts the noise variance as a parameter: it equals
    the generic ``AICc = -2 llf + 2 k n / (n - k - 1)`` with ``k = p + 1`` minus the constant
    ``n log(2 pi)``, i.e. statsmodels ``info_criteria('aicc', dk_params=1) - n log(2 pi)``.
    (It is not on the scale of :func:`aic`, which keeps the constant and does not count the
    variance; compare AICc values only with each other.)

    Parameters
    ----------
    rss : array-like of shape (n_capacities,)
    n_params : array-like of shape (n_capacities,)
        Rank of each design, intercept included.
    n : int

    Returns
    -------
    ndarray of shape (n_capacities,)
        ``+inf`` where ``n - p - 2 <= 0``, where the criterion is undefined (so no rule picks it),
        even when RSS = 0; ``-inf`` where RSS = 0 otherwise.

    Examples
    --------
    >>> aicc([3.6, 1.0], [2, 3], 5).round(6)          # METHODS.md §6 worked check
    array([33.35748,      inf])
    """
    n = _check_n(n)
    r, p = _rss_p(rss, n_params, n)
    room = n - p - 2.0
    ok = room > 0
    pen = n * (n + p) / np.where(ok, room, 1.0)
    with np.errstate(divide="ignore"):
        fit_term = n * np.log(r / n)
    # undefined (n - p - 2 <= 0) wins over an exact fit's -inf likelihood term
    return np.where(ok, fit_term + pen, np.inf)


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
        raise ValueError(f"leverage values must lie in [0, 1]; got {_short_repr(h)}.")
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
    defined = ~np.any(h > 1.0 - tol, axis=1)
    return np.asarray(defined, dtype=bool)


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
        raise TypeError(f"sigma2 must be a positive number; got {_short_repr(sigma2)}.")
    value = float(sigma2)
    if not (np.isfinite(value) and value > 0):
        raise ValueError(f"sigma2 must be a finite number > 0; got {sigma2!r}.")
    return value


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


def _condition(condition: ArrayLike | None, size: int) -> NDArray[np.float64]:
    if condition is None:
        return np.ones(size)
    kappa = np.atleast_1d(np.asarray(condition, dtype=np.float64))
    if kappa.ndim != 1 or kappa.size != size:
        raise ValueError(
            f"condition must hold one condition number per capacity ({size}); "
            f"got shape {kappa.shape}."
        )
    if not (np.isfinite(kappa) & (kappa >= 1.0)).all():
        raise ValueError(
            "condition must hold finite 2-norm condition numbers >= 1 (drop rank-deficient "
            f"capacities first); got {_short_repr(kappa)}."
        )
    return kappa


def rounding_level_rss(y: ArrayLike, condition: ArrayLike | None = None) -> NDArray[np.float64]:
    """Largest RSS that float64 rounding alone can produce when a model fits ``y`` exactly.

    ``tau_k = (sqrt(n) eps (1 + 2 kappa_k))^2 sum_i y_i^2`` for each capacity ``k``, with ``eps``
    the float64 machine epsilon and ``kappa_k`` the 2-norm condition number of the design the fit
    was computed with. An RSS ``<= tau_k`` is indistinguishable from 0: the data fit exactly.

    Parameters
    ----------
    y : array-like of shape (n_samples,)
        The response the models were fitted to.
    condition : array-like of shape (n_capacities,), optional
        Condition number of each capacity's design (default 1: an orthonormal design).

    Returns
    -------
    ndarray of shape (n_capacities,)

    Notes
    -----
    Why this level. A Householder least-squares solve returns the exact solution of a problem
    whose data are perturbed by a modest multiple of ``eps`` (the backward error grows like
    ``sqrt(n) eps`` in practice, ``n eps`` in the worst case; METHODS.md §9 uses ``n eps`` for
    rank loss). To first order such a perturbation moves the residual vector by at most
    ``delta (1 + 2 kappa) ||y||`` (the least-squares perturbation bound, Golub & Van Loan 2013,
    ch. 5; from memory). The scale is the uncentred ``sum y^2``, not ``n var(y)``: the
    factorisation works on ``y`` including its mean, so the rounding is relative to ``||y||``.

    Measured (float64, the library's stable polynomial basis, kappa 3 to 4.5): NIST Wampler1 and
    Wampler2, exact quintics with n = 21, have ``RSS / sum y^2 <= 1e-31`` from degree 5 on,
    about 500 times below this level (5e-29); the least noisy NIST sets stay far above it
    (Pontius 2e-8, Filip 1e-5 at their certified degrees).

    Examples
    --------
    >>> rounding_level_rss(np.ones(4)) / 4 / np.finfo(float).eps ** 2  # (sqrt(4) (1 + 2))^2
    array([36.])
    >>> rounding_level_rss([3.0, 4.0], [1.0, 10.0]).shape
    (2,)
    """
    ya = np.asarray(y, dtype=np.float64)
    if ya.ndim != 1 or ya.size == 0:
        raise ValueError(f"y must be a non-empty 1-D array of responses; got shape {ya.shape}.")
    if not np.isfinite(ya).all():
        raise ValueError(f"y must be finite; got {_short_repr(ya)}.")
    size = 1 if condition is None else np.atleast_1d(np.asarray(condition)).size
    kappa = _condition(condition, size)
    scale = float(np.sum(ya**2))
    return (np.sqrt(ya.size) * _EPS * (1.0 + 2.0 * kappa)) ** 2 * scale


def criteria_table(
    residuals: ArrayLike,
    leverage: ArrayLike,
    n_params: ArrayLike,
    *,
    capacities: ArrayLike | None = None,
    sigma2: float | None = None,
    rss: ArrayLike | None = None,
    y: ArrayLike | None = None,
    condition: ArrayLike | None = None,
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
        model, :func:`noise_variance_from_largest`, after the exact-fit guard below).
    rss : array-like of shape (n_capacities,), optional
        Residual sums of squares if computed more accurately elsewhere (e.g. tail sums of a QR);
        default ``sum(residuals**2)``.
    y : array-like of shape (n_samples,), optional
        The response. Turns on the exact-fit guard: a capacity whose RSS is at most
        :func:`rounding_level_rss` (``tau_k``) fits exactly, ``exact_fit`` is True there, and
        its criteria are evaluated at the rounding level: ``gcv, aic, aicc, bic, cp`` with
        ``RSS = tau_k``, ``loocv`` with ``tau_k / (n min_i (1 - h_ii)^2)``, the largest
        leave-one-out error residuals of squared norm ``tau_k`` can give (the true value of an
        exact fit is 0). The ``rss`` column keeps the computed values. Without ``y`` no capacity
        is flagged and the criteria rank whatever RSS they are given, rounding noise included.
    condition : array-like of shape (n_capacities,), optional
        2-norm condition number of each capacity's design, for the rounding level (default 1).

    Returns
    -------
    pandas.DataFrame
        Columns ``n_params, rss, exact_fit, loocv, loocv_defined, gcv, aic, aicc, bic, cp,
        fixed_design_variance``; ``attrs["sigma2"]`` holds the noise variance used and
        ``attrs["rounding_level_rss"]`` the level ``tau_k`` per capacity (None without ``y``).

    Examples
    --------
    >>> import numpy as np
    >>> from complexity.lstsq.nested import nested_least_squares
    >>> x = np.arange(5.0)
    >>> fit = nested_least_squares(np.column_stack([np.ones(5), x, x**2]), [1, 3, 2, 5, 4],
    ...                            n_columns_per_capacity=[1, 2, 3])
    >>> t = criteria_table(fit.fitted_residuals, fit.leverage, fit.rank, rss=fit.rss)
    >>> t["gcv"].round(4).tolist()
    [3.125, 2.0, 4.1429]
    >>> t["cp"].round(4).tolist()
    [3.0345, 1.1724, 3.0]

    Data on a straight line fit exactly from the line on: the guard counts the rounding-level
    RSS as zero, so every criterion picks the line, not the noise of the larger model.

    >>> y = 1.0 + 0.1 * x
    >>> fit = nested_least_squares(np.column_stack([np.ones(5), x, x**2]), y,
    ...                            n_columns_per_capacity=[1, 2, 3])
    >>> t = criteria_table(fit.fitted_residuals, fit.leverage, fit.rank, rss=fit.rss, y=y,
    ...                    condition=fit.condition)
    >>> t["exact_fit"].tolist()
    [False, True, True]
    >>> [int(t[c].to_numpy().argmin()) for c in ("loocv", "gcv", "aic", "bic", "cp")]
    [1, 1, 1, 1, 1]
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
    index = pd.Index(
        np.arange(p.size) if capacities is None else np.asarray(capacities), name="capacity"
    )
    if len(index) != p.size:
        raise ValueError(f"capacities has {len(index)} entries but there are {p.size} capacities.")
    cv = loocv(e, h)
    defined = loocv_defined(h)
    r_used = r
    level = None
    exact = np.zeros(p.size, dtype=bool)
    if y is not None:
        ya = np.asarray(y, dtype=np.float64)
        if ya.ndim != 1 or ya.size != n:
            raise ValueError(
                f"y must be 1-D with one value per sample ({n}, as residuals); "
                f"got shape {ya.shape}."
            )
        level = rounding_level_rss(ya, _condition(condition, p.size))
        exact = r <= level
        # y = 0 gives level 0: keep the floor positive so the criteria stay finite
        floor = np.maximum(level, np.finfo(np.float64).tiny)
        r_used = np.where(exact, floor, r)
        with np.errstate(divide="ignore"):
            worst = floor / (n * np.min(1.0 - h, axis=1) ** 2)
        cv = np.where(exact & defined, worst, cv)
    elif condition is not None:
        _condition(condition, p.size)
    s2 = noise_variance_from_largest(r_used, p, n) if sigma2 is None else _check_sigma2(sigma2)
    table = pd.DataFrame(
        {
            "n_params": p.astype(int),
            "rss": r,
            "exact_fit": exact,
            "loocv": cv,
            "loocv_defined": defined,
            "gcv": gcv(r_used, p, n),
            "aic": aic(r_used, p, n),
            "aicc": aicc(r_used, p, n),
            "bic": bic(r_used, p, n),
            "cp": mallows_cp(r_used, p, n, sigma2=s2),
            "fixed_design_variance": fixed_design_variance(p, n, s2),
        },
        index=index,
    )
    table.attrs["sigma2"] = s2
    table.attrs["rounding_level_rss"] = level
    return table
