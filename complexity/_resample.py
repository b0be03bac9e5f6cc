"""Resamples and the plan interface: one training set, its scored rows, and its seed.

A :class:`Resample` says which rows train a model and where it is scored; a :class:`Plan` turns
the data into a list of them (the concrete plans live in :mod:`complexity.plans`). Every random
draw comes from a child of one root :class:`numpy.random.SeedSequence`, addressed by key
(:func:`child_seed`), so resamples do not depend on how the work is spread over processes.
"""

from __future__ import annotations

from collections.abc import Iterator
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ._params import ParamsMixin
from ._validation import as_seed_sequence, repr_from_description

__all__ = [
    "STREAM_ESTIMATOR",
    "STREAM_FULL_FIT",
    "STREAM_PILOT",
    "STREAM_RESAMPLE",
    "Plan",
    "Resample",
    "child_seed",
]

#: spawn-key prefixes that keep the independent random streams of a sweep apart
STREAM_RESAMPLE, STREAM_ESTIMATOR, STREAM_FULL_FIT, STREAM_PILOT = 0, 1, 2, 3


def child_seed(root: np.random.SeedSequence, *key: int) -> np.random.SeedSequence:
    """The child of ``root`` at ``key``: a pure function of the root and the key.

    This is what ``root.spawn`` produces, but addressed by key, so it never depends on how many
    children were spawned before.
    """
    return np.random.SeedSequence(root.entropy, spawn_key=(*root.spawn_key, *key))


class Resample:
    """One training set and the evaluation points scored against it.

    Attributes
    ----------
    index : int
        Position of this resample in the plan.
    replicate : int
        The replicate it belongs to: a bootstrap sample or a simulated training set is its own
        replicate; the folds of one repetition of K-fold share one. Selection stability is counted
        over replicates.
    train : ndarray of int or None
        Row positions of the training set in X (with repeats for the bootstrap, in sorted order);
        None for a simulation, whose training set is drawn from ``seed``.
    test : ndarray of int
        Positions of the evaluation points scored against this training set.
    counts : ndarray of int or None
        For a bootstrap resample: how many times each row of X was drawn (``train`` and ``test``
        are made from it on first use).
    root : numpy.random.SeedSequence
        The sweep's root seed.
    key : tuple of int
        Where the resample's own seed sits below the root (see :attr:`seed`).

    Examples
    --------
    >>> import numpy as np
    >>> r = Resample(0, 0, None, None, np.random.SeedSequence(0), (0,), counts=np.array([2, 0, 1]))
    >>> r.train.tolist(), r.test.tolist()
    ([0, 0, 2], [1])
    """

    __slots__ = ("_test", "_train", "counts", "index", "key", "replicate", "root")

    def __init__(
        self,
        index: int,
        replicate: int,
        train: NDArray[np.intp] | None,
        test: NDArray[np.intp] | None,
        root: np.random.SeedSequence,
        key: tuple[int, ...],
        *,
        counts: NDArray[np.intp] | None = None,
    ) -> None:
        if test is None and counts is None:
            raise ValueError("a resample needs its test rows or its bootstrap counts")
        self.index, self.replicate = index, replicate
        self._train, self._test = train, test
        self.root, self.key, self.counts = root, key, counts

    @property
    def train(self) -> NDArray[np.intp] | None:
        """Training rows (for a bootstrap, the drawn rows in sorted order: a counting sort)."""
        if self._train is None and self.counts is not None:
            self._train = np.repeat(np.arange(self.counts.size), self.counts)
        return self._train

    @property
    def test(self) -> NDArray[np.intp]:
        """Evaluation points (for a bootstrap, the rows never drawn: out of bag)."""
        if self._test is None:
            assert self.counts is not None
            self._test = np.flatnonzero(self.counts == 0)
        return self._test

    @property
    def seed(self) -> np.random.SeedSequence:
        """The resample's own seed: the child of ``root`` at ``(STREAM_RESAMPLE, *key)``."""
        return child_seed(self.root, STREAM_RESAMPLE, *self.key)

    def __repr__(self) -> str:
        return (
            f"Resample(index={self.index}, replicate={self.replicate}, "
            f"n_train={None if self.train is None else self.train.size}, n_test={self.test.size})"
        )


class Plan(ParamsMixin):
    """Base class of the plans. Subclasses implement :meth:`resamples` and :meth:`describe`."""

    kind: str = "plan"

    def resamples(
        self,
        n: int,
        root: np.random.SeedSequence,
        X: NDArray[np.float64] | None = None,
        y: NDArray[np.float64] | None = None,
        groups: Any = None,
    ) -> list[Resample]:
        raise NotImplementedError

    def split(
        self, X: Any, y: Any = None, groups: Any = None, random_state: Any = None
    ) -> Iterator[tuple[NDArray[np.intp], NDArray[np.intp]]]:
        """Yield ``(train, test)`` row positions, as the sweep would draw them for ``random_state``.

        Useful to hand exactly the sweep's training sets to another tool, such as
        :func:`sklearn.model_selection.cross_val_score` (``cv=list(plan.split(X, random_state=0))``).
        """
        n = len(X)
        for r in self.resamples(n, as_seed_sequence(random_state), X, y, groups):
            if r.train is None:
                raise TypeError("a Simulation draws fresh data; it has no split of X.")
            yield r.train, r.test

    def describe(self) -> dict[str, Any]:
        raise NotImplementedError

    def __repr__(self) -> str:
        return repr_from_description(self)
