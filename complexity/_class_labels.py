"""Class labels for the loss sweeps: one class order from the full data, kept across resamples.

The order is ``numpy.unique(y)`` of the whole data set, labels kept as given (strings too).
:func:`align_proba` maps a fitted model's ``classes_`` into it, with zero probability for a class
the model never saw, so a class missing from a training set never shifts columns. Re-exported by
:mod:`complexity.losses`.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike, NDArray

from ._validation import _short_repr

__all__ = ["align_proba", "check_labels", "encode_labels"]


def check_labels(y: Any, n: int) -> tuple[NDArray[Any], NDArray[Any], NDArray[np.intp]]:
    """Validate class labels; return (a copy of y, the class order ``numpy.unique(y)``, codes).

    Examples
    --------
    >>> _, classes, codes = check_labels(["oak", "ash", "oak"], 3)
    >>> classes.tolist(), codes.tolist()
    (['ash', 'oak'], [1, 0, 1])
    """
    arr = np.array(y, copy=True)
    if arr.ndim == 2 and arr.shape[1] == 1:
        arr = arr[:, 0]
    if arr.ndim != 1:
        raise ValueError(f"y must be 1-D (one class label per row); got shape {arr.shape}.")
    if arr.shape[0] != n:
        raise ValueError(f"X and y have different lengths: X has {n} rows, y has {arr.shape[0]}.")
    missing = pd.isna(arr)
    if np.any(missing):
        raise ValueError(
            f"y has {int(missing.sum())} missing label(s) (first at row "
            f"{int(np.flatnonzero(missing)[0])}); drop those rows or label them."
        )
    try:
        classes = np.unique(arr)
    except TypeError:
        raise TypeError(
            "y mixes label types that cannot be sorted (e.g. numbers and strings); "
            f"got {_short_repr(arr[:5].tolist())}. Use one type for every label."
        ) from None
    if classes.size < 2:
        raise ValueError(
            f"y has a single class {classes.tolist()}; a classifier needs two or more."
        )
    return arr, classes, encode_labels(arr, classes)


def encode_labels(labels: ArrayLike, classes: NDArray[Any], *, name: str = "y") -> NDArray[np.intp]:
    """Positions of ``labels`` in the sorted class array ``classes``; unknown labels are refused.

    Examples
    --------
    >>> import numpy as np
    >>> encode_labels(["b", "a", "b"], np.array(["a", "b"])).tolist()
    [1, 0, 1]
    """
    lab = np.asarray(labels)
    pos = np.searchsorted(classes, lab)
    pos = np.clip(pos, 0, classes.size - 1)
    bad = classes[pos] != lab
    if np.any(bad):
        first = lab[np.flatnonzero(bad)[0]]
        raise ValueError(
            f"{name} holds the label {first!r}, which is not one of the classes "
            f"{classes.tolist()} found in the full data."
        )
    return pos.astype(np.intp)


def align_proba(
    proba: ArrayLike, model_classes: ArrayLike, classes: NDArray[Any]
) -> NDArray[np.float64]:
    """Put a fitted model's ``predict_proba`` columns into the full data's class order.

    Parameters
    ----------
    proba : array-like of shape (n, len(model_classes))
        Probabilities in the order of the model's ``classes_``.
    model_classes : array-like
        The fitted model's ``classes_``.
    classes : ndarray
        The full data's classes, ``numpy.unique(y)``.

    Returns
    -------
    ndarray of shape (n, len(classes))
        A class the model never saw (absent from its training set) gets probability zero.

    Examples
    --------
    A model trained without class "b":

    >>> import numpy as np
    >>> align_proba([[0.25, 0.75]], ["a", "c"], np.array(["a", "b", "c"])).tolist()
    [[0.25, 0.0, 0.75]]
    """
    p = np.asarray(proba, dtype=np.float64)
    cols = encode_labels(model_classes, classes, name="the model's classes_")
    if p.ndim != 2 or p.shape[1] != cols.size:
        raise ValueError(
            f"predict_proba returned shape {p.shape}; expected (n, {cols.size}), one column per "
            "class in the model's classes_."
        )
    out = np.zeros((p.shape[0], classes.size))
    out[:, cols] = p
    return out
