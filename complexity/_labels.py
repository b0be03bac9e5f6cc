"""Labels of capacity values: a pandas Index that keeps them as the ladder gives them."""

from __future__ import annotations

import numbers
from collections.abc import Iterable
from typing import Any

import pandas as pd

__all__ = ["capacity_index"]


def capacity_index(values: Iterable[Any], name: str | None = None) -> pd.Index:
    """A pandas Index of capacity values that keeps them as given.

    Numbers stay numbers; a ladder holding ``None`` (e.g. ``max_depth=None``) or mixed kinds
    gets an object index, so ``None`` is not turned into NaN.

    Examples
    --------
    >>> capacity_index([1, 3, None], "max_depth").tolist()
    [1, 3, None]
    """
    values = list(values)
    plain = all(isinstance(v, numbers.Real) and not isinstance(v, bool) for v in values)
    return pd.Index(values, name=name, dtype=None if plain else object)
