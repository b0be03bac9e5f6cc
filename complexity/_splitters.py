"""Any scikit-learn splitter as a plan, and whether its training sets are exchangeable.

An object with scikit-learn's ``split(X, y, groups)`` (``GroupKFold``, ``TimeSeriesSplit``,
``ShuffleSplit``, ...) becomes a plan through :func:`complexity.plans.as_plan`. The adapter
numbers the replicates (a new one starts when a row is scored again) and says whether the
splitter's training sets are random subsets of the other rows, which the variance estimate needs.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from sklearn import model_selection
from sklearn.model_selection import KFold

from ._resample import Plan, Resample

__all__ = ["splitter_exchangeable"]


class _SplitterPlan(Plan):
    """Adapter for any object with scikit-learn's ``split(X, y, groups)``."""

    kind = "splitter"

    def __init__(self, splitter: Any) -> None:
        self.splitter = splitter

    def resamples(
        self,
        n: int,
        root: np.random.SeedSequence,
        X: Any = None,
        y: Any = None,
        groups: Any = None,
    ) -> list[Resample]:
        if X is None:
            raise ValueError("a scikit-learn splitter needs the data X.")
        out: list[Resample] = []
        replicate, seen = 0, np.zeros(n, dtype=bool)
        for index, (train, test) in enumerate(self.splitter.split(X, y, groups)):
            train = np.asarray(train, dtype=np.intp)
            test = np.asarray(test, dtype=np.intp)
            if train.size == 0 or test.size == 0:
                which = "training" if train.size == 0 else "test"
                raise ValueError(
                    f"plan {self.splitter!r} produced an empty {which} set in split {index}; "
                    "every split needs at least one training and one test row."
                )
            if seen[test].any():  # a row scored again: a new repetition has started
                replicate, seen = replicate + 1, np.zeros(n, dtype=bool)
            seen[test] = True
            out.append(Resample(index, replicate, train, test, root, (index,)))
        if not out:
            raise ValueError(f"plan {self.splitter!r} produced no splits.")
        return out

    def describe(self) -> dict[str, Any]:
        return {"kind": self.kind, "splitter": repr(self.splitter)}

    def __repr__(self) -> str:
        return repr(self.splitter)


#: scikit-learn splitters whose training sets are uniformly random subsets of the other rows
_EXCHANGEABLE_SPLITTERS = ("KFold", "RepeatedKFold", "ShuffleSplit")


def splitter_exchangeable(splitter: Any) -> tuple[bool, str]:
    name = type(splitter).__name__
    known = tuple(getattr(model_selection, k) for k in _EXCHANGEABLE_SPLITTERS)
    if type(splitter) not in known:
        return False, (
            f"{name}'s training sets are not known to be random subsets of the other rows (groups, "
            "time order or strata shape them), so the spread of its predictions is not a sampling "
            "variance"
        )
    if isinstance(splitter, KFold) and not splitter.shuffle:
        return False, (
            "KFold(shuffle=False) cuts contiguous folds, which are not random subsets of the rows"
        )
    return True, ""
