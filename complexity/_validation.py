"""Argument and array checks with clear messages.

Every public entry point calls these helpers first, so the rest of the package can assume clean
float arrays. Messages name the argument, show the repr of what was received and say what is
accepted. Inputs are never modified: arrays are always copied before any conversion.
"""

from __future__ import annotations

import numbers
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike, NDArray

__all__: list[str] = []


def _short_repr(value: Any, limit: int = 80) -> str:
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 3] + "..."


def check_int(name: str, value: Any, *, minimum: int | None = None) -> int:
    """Return ``value`` as an int, or raise naming ``name``.

    Booleans and floats (even integral ones such as ``2.0``) are refused: a capacity or count
    given as a float is usually a mistake worth pointing out.
    """
    if isinstance(value, bool) or not isinstance(value, numbers.Integral):
        raise TypeError(
            f"{name} must be an int; got {_short_repr(value)} of type {type(value).__name__}."
        )
    value = int(value)
    if minimum is not None and value < minimum:
        raise ValueError(f"{name} must be an int >= {minimum}; got {value}.")
    return value


def check_float(
    name: str, value: Any, *, minimum: float | None = None, strict: bool = False
) -> float:
    """Return ``value`` as a finite float, or raise naming ``name``."""
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise TypeError(f"{name} must be a real number; got {_short_repr(value)}.")
    value = float(value)
    if not np.isfinite(value):
        raise ValueError(f"{name} must be finite; got {value!r}.")
    if minimum is not None and (value < minimum or (strict and value == minimum)):
        bound = ">" if strict else ">="
        raise ValueError(f"{name} must be {bound} {minimum}; got {value!r}.")
    return value


def check_option(name: str, value: Any, options: tuple[str, ...]) -> str:
    """Return ``value`` if it is one of ``options``, else raise naming ``name``."""
    if not isinstance(value, str) or value not in options:
        listed = ", ".join(repr(o) for o in options)
        raise ValueError(f"{name} must be one of {listed}; got {_short_repr(value)}.")
    return value


def as_seed_sequence(random_state: Any) -> np.random.SeedSequence:
    """Resolve ``random_state`` into one root :class:`numpy.random.SeedSequence`.

    Accepts None (fresh entropy, recorded so the run can be repeated), a non-negative int, a
    ``SeedSequence``, a ``numpy.random.Generator`` or a legacy ``numpy.random.RandomState``.
    A generator instance is advanced, so passing the same generator twice gives new but
    reproducible streams.
    """
    if random_state is None:
        return np.random.SeedSequence()
    if isinstance(random_state, np.random.SeedSequence):
        return random_state
    if isinstance(random_state, bool):
        raise TypeError(
            "random_state must be None, an int, a SeedSequence or a Generator; got a bool."
        )
    if isinstance(random_state, numbers.Integral):
        if random_state < 0:
            raise ValueError(f"random_state must be a non-negative int; got {random_state}.")
        return np.random.SeedSequence(int(random_state))
    if isinstance(random_state, np.random.Generator):
        return np.random.SeedSequence(int(random_state.integers(0, 2**63 - 1)))
    if isinstance(random_state, np.random.RandomState):
        return np.random.SeedSequence(int(random_state.randint(0, 2**31 - 1)))
    raise TypeError(
        "random_state must be None, an int, a numpy SeedSequence, Generator or RandomState; "
        f"got {_short_repr(random_state)}."
    )


@dataclass(frozen=True)
class CheckedData:
    """Validated copies of the user's data."""

    X: NDArray[np.float64]
    y: NDArray[np.float64]
    feature_names: tuple[str, ...] | None
    groups: NDArray[Any] | None


def _feature_names(X: Any) -> tuple[str, ...] | None:
    if isinstance(X, pd.DataFrame):
        return tuple(str(c) for c in X.columns)
    return None


def check_X(X: ArrayLike, *, name: str = "X") -> tuple[NDArray[np.float64], tuple[str, ...] | None]:
    """Validate predictors: numeric, finite, 1-D or 2-D, at least one row. Returns a float copy."""
    names = _feature_names(X)
    if isinstance(X, pd.DataFrame):
        bad = [
            str(c)
            for c, dt in X.dtypes.items()
            if not pd.api.types.is_numeric_dtype(dt) or pd.api.types.is_bool_dtype(dt)
        ]
        if bad:
            raise TypeError(
                f"{name} has non-numeric columns {bad}; every predictor must be numeric "
                "(encode categories as numbers first)."
            )
        arr = X.to_numpy(dtype=np.float64, copy=True)
    elif isinstance(X, (str, bytes)) or X is None:
        raise TypeError(f"{name} must be an array-like of numbers; got {_short_repr(X)}.")
    else:
        raw = np.asarray(X)
        if raw.dtype.kind not in "iuf":
            if raw.dtype.kind == "b":
                raise TypeError(
                    f"{name} must be numeric; got a boolean array. Convert it with .astype(float)."
                )
            try:
                arr = np.array(raw, dtype=np.float64, copy=True)
            except (TypeError, ValueError):
                raise TypeError(
                    f"{name} must contain only numbers; got an array of dtype {raw.dtype} "
                    f"starting {_short_repr(raw.ravel()[:3].tolist())}."
                ) from None
        else:
            arr = np.array(raw, dtype=np.float64, copy=True)
    if arr.ndim == 1:
        arr = arr.reshape(-1, 1)
    if arr.ndim != 2:
        raise ValueError(f"{name} must be 1-D or 2-D; got an array with shape {arr.shape}.")
    if arr.shape[0] == 0:
        raise ValueError(f"{name} is empty (0 rows); at least 3 observations are needed.")
    if arr.shape[1] == 0:
        raise ValueError(f"{name} has no columns; at least one predictor is needed.")
    bad_rows = ~np.isfinite(arr).all(axis=1)
    if bad_rows.any():
        first = int(np.flatnonzero(bad_rows)[0])
        raise ValueError(
            f"{name} contains NaN or infinite values in {int(bad_rows.sum())} row(s) (first: row {first}); "
            "remove or impute them before sweeping."
        )
    return arr, names


def check_y(y: ArrayLike, *, name: str = "y") -> NDArray[np.float64]:
    """Validate the response: numeric, finite, 1-D. Returns a float copy."""
    if isinstance(y, pd.DataFrame):
        if y.shape[1] != 1:
            raise ValueError(
                f"{name} must be one column; got a DataFrame with {y.shape[1]} columns."
            )
        y = y.iloc[:, 0]
    if isinstance(y, (str, bytes)) or y is None:
        raise TypeError(f"{name} must be an array-like of numbers; got {_short_repr(y)}.")
    raw = np.asarray(y)
    if raw.dtype.kind == "b":
        raise TypeError(f"{name} must be numeric; got a boolean array.")
    try:
        arr = np.array(raw, dtype=np.float64, copy=True)
    except (TypeError, ValueError):
        raise TypeError(
            f"{name} must contain only numbers; got dtype {raw.dtype} "
            f"starting {_short_repr(raw.ravel()[:3].tolist())}."
        ) from None
    if arr.ndim == 2 and arr.shape[1] == 1:
        arr = arr[:, 0].copy()
    if arr.ndim != 1:
        raise ValueError(f"{name} must be 1-D (one response); got shape {arr.shape}.")
    if arr.size == 0:
        raise ValueError(f"{name} is empty; at least 3 observations are needed.")
    bad = ~np.isfinite(arr)
    if bad.any():
        raise ValueError(
            f"{name} contains NaN or infinite values at {int(bad.sum())} position(s) "
            f"(first: {int(np.flatnonzero(bad)[0])}); remove or impute them before sweeping."
        )
    return arr


def check_X_y(
    X: ArrayLike, y: ArrayLike, *, groups: ArrayLike | None = None, min_samples: int = 3
) -> CheckedData:
    """Validate predictors and response together (lengths, minimum size, groups)."""
    Xa, names = check_X(X)
    ya = check_y(y)
    if Xa.shape[0] != ya.shape[0]:
        raise ValueError(
            f"X and y have different lengths: X has {Xa.shape[0]} rows, y has {ya.shape[0]} values."
        )
    if Xa.shape[0] < min_samples:
        raise ValueError(
            f"X and y have {Xa.shape[0]} observation(s); at least {min_samples} are needed to "
            "train and evaluate a model."
        )
    g = None
    if groups is not None:
        g = np.array(groups, copy=True)
        if g.ndim != 1 or g.shape[0] != Xa.shape[0]:
            raise ValueError(
                f"groups must be 1-D with one label per row of X ({Xa.shape[0]}); got shape {g.shape}."
            )
    return CheckedData(Xa, ya, names, g)
