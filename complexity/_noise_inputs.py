"""Argument checks shared by the noise estimators: arrays of reals, finite values, clear errors.

Every function here reads its input and never writes to it; a float array is a view when the
input already is one, else a copy.
"""

from __future__ import annotations

import functools
import math
import numbers
from collections.abc import Callable
from typing import Any, TypeVar

import numpy as np
from numpy.typing import NDArray

_T = TypeVar("_T")


def _quiet_overflow(func: Callable[..., _T]) -> Callable[..., _T]:
    """Silence numpy's overflow warnings: ``_finite`` turns overflow into a clear error."""

    @functools.wraps(func)
    def wrapper(*args: Any, **kwargs: Any) -> _T:
        with np.errstate(over="ignore", invalid="ignore"):
            return func(*args, **kwargs)

    return wrapper


def _short_repr(value: Any, limit: int = 80) -> str:
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 3] + "..."


def _finite(value: float, who: str) -> float:
    """Return ``value`` or raise if it overflowed (the caller silences numpy's warning)."""
    if not math.isfinite(value):
        raise ValueError(
            f"{who} overflowed (got {value!r}); rescale y (and x) to moderate magnitudes."
        )
    return value


def _check_real(name: str, value: Any) -> float:
    if isinstance(value, bool | np.bool_) or not isinstance(value, numbers.Real):
        raise TypeError(f"{name} must be a real number; got {_short_repr(value)}.")
    value = float(value)
    if not math.isfinite(value):
        raise ValueError(f"{name} must be finite; got {value!r}.")
    return value


def _as_float_array(value: Any, name: str) -> NDArray[np.float64]:
    """Float view or copy of ``value``; the input itself is never written to."""
    if value is None or isinstance(value, str | bytes):
        raise TypeError(f"{name} must be an array of real numbers; got {_short_repr(value)}.")
    try:
        arr = np.asarray(value)
    except (TypeError, ValueError) as exc:  # ragged nested lists and the like
        raise TypeError(
            f"{name} must be an array of real numbers; got {_short_repr(value)} ({exc})."
        ) from None
    if arr.dtype.kind not in "biuf":
        raise TypeError(
            f"{name} must be an array of real numbers; got dtype {arr.dtype} "
            f"({_short_repr(value)})."
        )
    return arr.astype(np.float64, copy=False)


def _require_finite(arr: NDArray[np.float64], name: str) -> None:
    bad = ~np.isfinite(arr)
    if bad.any():
        first = np.argwhere(bad)[0]
        where = f"row {first[0]}" if arr.ndim == 1 else f"row {first[0]}, column {first[1]}"
        raise ValueError(
            f"{name} must be finite; it has {int(bad.sum())} NaN or infinite entries "
            f"(first at {where}). Remove or impute them first."
        )


def _as_design(X: Any, name: str) -> NDArray[np.float64]:
    arr = _as_float_array(X, name)
    if arr.ndim == 1:
        arr = arr[:, None]
    if arr.ndim != 2:
        raise ValueError(
            f"{name} must be 2-D of shape (n_samples, n_features) or 1-D for one predictor; "
            f"got shape {arr.shape}."
        )
    if arr.shape[0] == 0 or arr.shape[1] == 0:
        raise ValueError(f"{name} must have at least one row and one column; got {arr.shape}.")
    _require_finite(arr, name)
    return arr


def _as_x(x: Any) -> NDArray[np.float64]:
    arr = _as_float_array(x, "x")
    if arr.ndim == 2 and arr.shape[1] == 1:
        arr = arr[:, 0]
    if arr.ndim != 1:
        raise ValueError(
            "x must be one predictor: 1-D of shape (n_samples,) or 2-D of shape (n_samples, 1); "
            f"got shape {arr.shape}. Use neighbour_variance for several predictors."
        )
    if arr.size == 0:
        raise ValueError("x must have at least one value; got an empty array.")
    _require_finite(arr, "x")
    return arr


def _as_y(y: Any, n: int) -> NDArray[np.float64]:
    arr = _as_float_array(y, "y")
    if arr.ndim != 1:
        raise ValueError(f"y must be 1-D of shape (n_samples,); got shape {arr.shape}.")
    if arr.size != n:
        raise ValueError(f"y must have one value per row of x/X ({n}); got {arr.size} values.")
    _require_finite(arr, "y")
    return arr
