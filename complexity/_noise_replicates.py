"""Pure error: the noise variance from groups of identical rows of ``X``.

With ``m`` groups of identical rows, ``SS_pe / (n - m)`` is the pure-error mean square of the
lack-of-fit test, unbiased for any ``f`` (METHODS.md 7.4).
"""

from __future__ import annotations

import numbers
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ._noise_inputs import _as_design, _as_y, _finite, _quiet_overflow, _short_repr
from ._validation import row_groups

__all__ = ["replicate_variance"]


def replicate_variance(
    X: ArrayLike, y: ArrayLike, *, decimals: int | None = None
) -> tuple[float, float] | None:
    """Pure-error variance from groups of identical rows of ``X``.

    With ``m`` groups of identical rows (group ``j`` of size ``n_j``, ``n = sum n_j``)::

        SS_pe = sum_j sum_l (y_jl - ybar_j)^2,   df = n - m,   sigma2 = SS_pe / df

    This is the pure-error mean square of the lack-of-fit test (Draper & Smith 1998). It is
    unbiased for any ``f``, because ``f`` is constant within a group.

    Parameters
    ----------
    X : array-like of shape (n_samples, n_features) or (n_samples,)
        Predictors; a 1-D array is one predictor.
    y : array-like of shape (n_samples,)
        Responses.
    decimals : int or None, default=None
        If given, round every entry of ``X`` to this many decimals before grouping, so that
        floating-point near-duplicates count as replicates. Rows on either side of a rounding
        boundary stay apart, and any spread of ``f`` inside a group adds to the estimate.

    Returns
    -------
    tuple of (float, float) or None
        ``(sigma2, df)``, or None when no row repeats (``df = 0``).

    See Also
    --------
    estimate_noise : picks this estimator when ``df >= 2``.

    Examples
    --------
    >>> replicate_variance([1, 1, 2, 2, 3, 3], [1, 3, 2, 4, 6, 8])
    (2.0, 3.0)
    >>> replicate_variance([1, 2, 3], [1, 2, 3]) is None
    True
    >>> replicate_variance([0.1 + 0.2, 0.3, 1.0], [1.0, 2.0, 5.0], decimals=9)
    (0.5, 1.0)
    """
    Xa = _as_design(X, "X")
    ya = _as_y(y, Xa.shape[0])
    decimals = _check_decimals(decimals)
    return _replicates(Xa, ya, decimals)


def _check_decimals(decimals: Any) -> int | None:
    if decimals is None:
        return None
    if isinstance(decimals, bool | np.bool_) or not isinstance(decimals, numbers.Integral):
        raise TypeError(
            "decimals must be None or an int (digits to round X to before grouping); "
            f"got {_short_repr(decimals)}."
        )
    return int(decimals)


def _group_means(
    y: NDArray[np.float64], inverse: NDArray[np.intp], counts: NDArray[np.intp]
) -> NDArray[np.float64]:
    """Group means of ``y``, refined by a second pass for accuracy."""
    means = np.bincount(inverse, weights=y, minlength=counts.size) / counts
    correction = np.bincount(inverse, weights=y - means[inverse], minlength=counts.size) / counts
    return means + correction


@_quiet_overflow
def _replicates(
    X: NDArray[np.float64], y: NDArray[np.float64], decimals: int | None
) -> tuple[float, float] | None:
    keys = X if decimals is None else np.round(X, decimals)
    inverse, counts = row_groups(keys)  # signed zeros group together
    df = y.size - counts.size
    if df == 0:
        return None
    resid = y - _group_means(y, inverse, counts)[inverse]
    value = _finite(float(resid @ resid) / df, "replicate_variance")
    return value, float(df)


@dataclass(frozen=True)
class _PureError:
    """Pure error with the facts ``noise="auto"`` weighs."""

    value: float
    df: float
    groups: int  # groups of identical rows with two or more rows
    rows: int  # rows in those groups
    flat: int  # of those groups, the ones whose y are all identical


@_quiet_overflow
def _pure_error(X: NDArray[np.float64], y: NDArray[np.float64]) -> _PureError | None:
    inverse, counts = row_groups(X)
    df = y.size - counts.size
    if df == 0:
        return None
    resid = y - _group_means(y, inverse, counts)[inverse]
    value = _finite(float(resid @ resid) / df, "replicate_variance")
    high = np.full(counts.size, -np.inf)
    low = np.full(counts.size, np.inf)
    np.maximum.at(high, inverse, y)
    np.minimum.at(low, inverse, y)
    repeated = counts >= 2
    return _PureError(
        value=value,
        df=float(df),
        groups=int(repeated.sum()),
        rows=int(counts[repeated].sum()),
        flat=int(np.sum(repeated & (high == low))),
    )
