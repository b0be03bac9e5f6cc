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


def repr_from_description(obj: Any) -> str:
    """``ClassName(key=value, ...)`` from ``obj.describe()``, leaving out its ``kind`` entry.

    Ladders and plans describe themselves as JSON-friendly dicts (stored with every result); their
    repr is built from the same dict so the two never disagree.
    """
    desc = obj.describe()
    args = ", ".join(f"{k}={v!r}" for k, v in desc.items() if k != "kind")
    return f"{type(obj).__name__}({args})"


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


def check_n_jobs(n_jobs: Any) -> int | None:
    """Return ``n_jobs`` if joblib accepts it (None or a non-zero int), else raise naming it."""
    if n_jobs is None:
        return None
    if isinstance(n_jobs, bool) or not isinstance(n_jobs, numbers.Integral):
        raise TypeError(
            f"n_jobs must be None or an int (1, 2, ..., or -1 for every core); got {_short_repr(n_jobs)}."
        )
    if n_jobs == 0:
        raise ValueError("n_jobs must be None or a non-zero int (-1 means every core); got 0.")
    return int(n_jobs)


def _raw_array(value: Any, name: str) -> np.ndarray:
    """``np.asarray(value)``, refusing the kinds of input it would silently mangle."""
    import scipy.sparse

    if scipy.sparse.issparse(value):
        raise TypeError(
            f"{name} is a scipy sparse matrix; pass a dense array (e.g. {name}.toarray())."
        )
    if isinstance(value, np.ma.MaskedArray):
        masked = int(np.ma.count_masked(value))
        if masked:
            raise ValueError(
                f"{name} is a masked array with {masked} masked value(s); drop those rows or "
                f"fill them ({name}.filled(...)) first."
            )
        value = np.ma.getdata(value)
    try:
        raw = np.asarray(value)
    except (TypeError, ValueError):
        raise ValueError(
            f"{name} must be a rectangular array of numbers (every row the same length); "
            f"got {_short_repr(value)}."
        ) from None
    if raw.dtype.kind == "c":
        raise TypeError(
            f"{name} must hold real numbers; got complex values (dtype {raw.dtype}). "
            "Pass the real part or the modulus explicitly."
        )
    if raw.dtype.kind in "mM":
        raise TypeError(
            f"{name} holds dates or time spans (dtype {raw.dtype}); convert them to numbers in "
            "units of your choice first (e.g. days since the first reading)."
        )
    return raw


def _float_copy(raw: NDArray[Any], name: str) -> NDArray[np.float64]:
    """A float64 copy of ``raw``; booleans and non-numbers are refused, naming ``name``."""
    if raw.dtype.kind == "b":
        raise TypeError(
            f"{name} must be numeric; got a boolean array. Convert it with .astype(float)."
        )
    try:
        return np.array(raw, dtype=np.float64, copy=True)
    except (TypeError, ValueError):
        raise TypeError(
            f"{name} must contain only numbers; got an array of dtype {raw.dtype} "
            f"starting {_short_repr(raw.ravel()[:3].tolist())}."
        ) from None


def check_sample_weight(sample_weight: Any, n: int) -> NDArray[np.float64] | None:
    """Validate per-row weights: one finite, non-negative number per row, not all zero.

    Returns a float copy (None when ``sample_weight`` is None).
    """
    if sample_weight is None:
        return None
    if isinstance(sample_weight, (str, bytes)):
        raise TypeError(
            f"sample_weight must be an array of numbers; got {_short_repr(sample_weight)}."
        )
    w = _float_copy(_raw_array(sample_weight, "sample_weight"), "sample_weight")
    if w.shape != (n,):
        raise ValueError(
            f"sample_weight must hold one weight per row of X ({n}); got shape {w.shape}."
        )
    bad = ~np.isfinite(w)
    if bad.any():
        raise ValueError(
            f"sample_weight contains NaN or infinite values at {int(bad.sum())} position(s) "
            f"(first: {int(np.flatnonzero(bad)[0])})."
        )
    if np.any(w < 0):
        first = int(np.flatnonzero(w < 0)[0])
        raise ValueError(
            f"sample_weight must be >= 0; got {float(w[first])!r} at position {first}."
        )
    if not np.any(w > 0):
        raise ValueError(
            "sample_weight is zero everywhere; at least one row needs a positive weight."
        )
    return w


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
            if not pd.api.types.is_numeric_dtype(dt)
            or pd.api.types.is_bool_dtype(dt)
            or pd.api.types.is_complex_dtype(dt)
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
        arr = _float_copy(_raw_array(X, name), name)
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
    with np.errstate(over="ignore"):
        span = arr.max(axis=0) - arr.min(axis=0)
    if not np.all(np.isfinite(span)):
        j = int(np.flatnonzero(~np.isfinite(span))[0])
        raise ValueError(
            f"{name} column {j} ranges from {arr[:, j].min()!r} to {arr[:, j].max()!r}; that range "
            f"overflows float64 arithmetic. Rescale {name} (e.g. change its units)."
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
    arr = _float_copy(_raw_array(y, name), name)
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
    scale = np.max(np.abs(arr))
    with np.errstate(over="ignore"):  # sums of squared errors, and of their squares (for SEs)
        worst = (2.0 * scale) ** 4 * np.float64(arr.size)
    if not np.isfinite(worst):
        raise ValueError(
            f"{name} has values as large as {scale:.3g} in magnitude; error sums on that scale "
            f"overflow float64. Rescale {name} (e.g. change its units) to magnitudes below 1e75."
        )
    spread = np.ptp(arr)
    if 0 < spread < 1e-75:  # squares of errors this small underflow (fourth powers below ~1e-300)
        raise ValueError(
            f"{name} varies only over {spread:.3g}; error sums on that scale underflow float64 and "
            f"would read as zero. Rescale {name} (e.g. change its units) so it varies over more "
            "than 1e-75."
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


def row_groups(X: NDArray[np.float64]) -> tuple[NDArray[np.intp], NDArray[np.intp]]:
    """Group equal rows of a 2-D float array: ``(label of each row, size of each group)``.

    Rows are compared by value (``-0.0`` equals ``0.0``); the number of distinct rows is
    ``sizes.size``. One column is compared as numbers, several as the bytes of whole rows
    (much faster than ``numpy.unique(X, axis=0)``). Labels are in no particular order.

    Examples
    --------
    >>> import numpy as np
    >>> labels, sizes = row_groups(np.array([[1.0, 2.0], [0.0, 1.0], [1.0, 2.0], [-0.0, 1.0]]))
    >>> sizes.size, bool(labels[0] == labels[2]), bool(labels[1] == labels[3])
    (2, True, True)
    """
    A = np.ascontiguousarray(np.asarray(X, dtype=np.float64) + 0.0)  # + 0.0: -0.0 -> 0.0
    if A.shape[0] == 0:
        return np.zeros(0, dtype=np.intp), np.zeros(0, dtype=np.intp)
    if A.shape[1] == 0:
        return np.zeros(A.shape[0], dtype=np.intp), np.array([A.shape[0]], dtype=np.intp)
    keys = A[:, 0] if A.shape[1] == 1 else A.view(np.dtype((np.void, 8 * A.shape[1]))).ravel()
    _, labels, sizes = np.unique(keys, return_inverse=True, return_counts=True)
    return labels.reshape(-1).astype(np.intp), sizes.astype(np.intp)
