"""Plans: where the training sets of a sweep come from.

A plan turns the data (or, for :class:`Simulation`, a known generative model) into a list of
:class:`Resample` objects: which rows train the model, and at which evaluation points it is scored.
Every random draw comes from a seed derived from one root :class:`numpy.random.SeedSequence` and the
resample's index, so the resamples do not depend on how the work is later spread over processes.

This module is the front door for plans: :class:`Resample`, the :class:`Plan` base class and the
seed streams are defined in :mod:`complexity._resample`, the scikit-learn splitter adapter in
:mod:`complexity._splitters`; both are imported from here.
"""

from __future__ import annotations

import functools
import numbers
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray
from sklearn.model_selection import KFold

from ._resample import (
    STREAM_ESTIMATOR,
    STREAM_FULL_FIT,
    STREAM_PILOT,
    STREAM_RESAMPLE,
    Plan,
    Resample,
    child_seed,
)
from ._splitters import _SplitterPlan, splitter_exchangeable
from ._streams import bootstrap_draws
from ._validation import _short_repr, check_float, check_int

__all__ = [
    "STREAM_ESTIMATOR",
    "STREAM_FULL_FIT",
    "STREAM_PILOT",
    "STREAM_RESAMPLE",
    "Bootstrap",
    "CrossValidation",
    "Plan",
    "Resample",
    "Simulation",
    "SplitLayout",
    "as_plan",
    "child_seed",
    "default_plan",
    "split_layout",
]


def _bootstrap_batch(n: int, root: np.random.SeedSequence, start: int, stop: int) -> list[Resample]:
    """Bootstrap resamples ``start .. stop - 1``: resample b draws its n rows from its own seed."""
    draws = bootstrap_draws(root, (STREAM_RESAMPLE,), range(start, stop), n)
    counts: NDArray[np.intp] | list[NDArray[np.intp]]
    if n * len(draws) <= 1 << 20:  # all counts in one pass
        rows = np.concatenate(draws) + np.repeat(np.arange(len(draws)) * n, n)
        counts = np.bincount(rows, minlength=n * len(draws)).reshape(len(draws), n)
    else:
        counts = [np.bincount(d, minlength=n) for d in draws]
    return [
        Resample(b, b, None, None, root, (b,), counts=counts[k])
        for k, b in enumerate(range(start, stop))
    ]


class _LazyResamples(Sequence):
    """A read-only sequence of resamples, each made from its own seed when it is asked for.

    A bootstrap of B = 1,000 resamples of n = 100,000 rows would hold about 1.1 GB of index
    arrays as a list; engines take resamples a chunk at a time, so only a chunk is ever held.
    Items are rebuilt on every access (identical each time).
    """

    def __init__(self, make: Callable[[int, int], list[Resample]], count: int, batch: int) -> None:
        self._make, self._count, self._batch = make, count, batch

    def __len__(self) -> int:
        return self._count

    @property
    def n_replicates(self) -> int:
        """Every lazily drawn resample is its own replicate (bootstrap)."""
        return self._count

    def __iter__(self) -> Iterator[Resample]:
        for start in range(0, self._count, self._batch):
            yield from self._make(start, min(start + self._batch, self._count))

    def __getitem__(self, i: Any) -> Any:
        if isinstance(i, slice):
            start, stop, step = i.indices(self._count)
            if step == 1:
                return self._make(start, stop) if stop > start else []
            return [self._make(b, b + 1)[0] for b in range(start, stop, step)]
        b = int(i) + self._count if int(i) < 0 else int(i)
        if not 0 <= b < self._count:
            raise IndexError(f"resample {i} out of range (there are {self._count})")
        return self._make(b, b + 1)[0]


class Bootstrap(Plan):
    """Bootstrap resampling: train on n rows drawn with replacement, score out of bag.

    Each row is scored only by the models whose bootstrap sample left it out (the leave-one-out
    bootstrap of Efron & Tibshirani, 1997), so the test error is honest and the per-row spread of
    predictions estimates the variance of the fitting procedure.

    Parameters
    ----------
    n_resamples : int, default=200
        Number of bootstrap samples (>= 2).

    Examples
    --------
    >>> import numpy as np
    >>> import complexity as cx
    >>> train, test = next(cx.Bootstrap(10).split(np.zeros((5, 1)), random_state=0))
    >>> len(train), bool(np.intersect1d(train, test).size == 0)
    (5, True)
    """

    kind = "bootstrap"

    def __init__(self, n_resamples: int = 200) -> None:
        self.n_resamples = check_int("n_resamples", n_resamples, minimum=2)

    def resamples(self, n, root, X=None, y=None, groups=None):
        # drawn on demand: B resamples of n rows never hold B index arrays at once
        # drawn in batches of about 64K rows, each resample from its own seed
        batch = max(1, min(256, 65_536 // max(n, 1)))
        return _LazyResamples(functools.partial(_bootstrap_batch, n, root), self.n_resamples, batch)

    def describe(self) -> dict[str, Any]:
        return {"kind": self.kind, "n_resamples": self.n_resamples}


class CrossValidation(Plan):
    """K-fold cross-validation, optionally repeated with fresh random partitions.

    Parameters
    ----------
    n_splits : int, default=10
        Number of folds K (>= 2).
    n_repeats : int, default=1
        Number of independent partitions. Two or more are needed for the variance and squared
        bias columns (each row must be predicted by at least two models).
    shuffle : bool, default=True
        Shuffle rows before cutting folds. Without shuffling, sorted x gives contiguous folds and
        every held-out fold is an extrapolation; ``shuffle=False`` requires ``n_repeats=1``.

    Examples
    --------
    >>> import numpy as np
    >>> import complexity as cx
    >>> folds = list(cx.CrossValidation(5).split(np.zeros((20, 1)), random_state=0))
    >>> len(folds), sorted(np.concatenate([test for _, test in folds]).tolist()) == list(range(20))
    (5, True)
    """

    kind = "cross-validation"

    def __init__(self, n_splits: int = 10, n_repeats: int = 1, shuffle: bool = True) -> None:
        self.n_splits = check_int("n_splits", n_splits, minimum=2)
        self.n_repeats = check_int("n_repeats", n_repeats, minimum=1)
        if not isinstance(shuffle, bool):
            raise TypeError(f"shuffle must be True or False; got {_short_repr(shuffle)}.")
        if not shuffle and self.n_repeats > 1:
            raise ValueError(
                f"n_repeats={self.n_repeats} with shuffle=False would repeat the same folds; "
                "use shuffle=True or n_repeats=1."
            )
        self.shuffle = shuffle

    def resamples(self, n, root, X=None, y=None, groups=None):
        if self.n_splits > n:
            raise ValueError(f"n_splits={self.n_splits} is more than the number of rows ({n}).")
        out = []
        for r in range(self.n_repeats):
            seed = child_seed(root, STREAM_RESAMPLE, r)
            state = (
                int(np.random.default_rng(seed).integers(0, 2**31 - 1)) if self.shuffle else None
            )
            folds = KFold(self.n_splits, shuffle=self.shuffle, random_state=state)
            for k, (train, test) in enumerate(folds.split(np.empty((n, 1)))):
                index = r * self.n_splits + k
                out.append(Resample(index, r, train, test, root, (r, k)))
        return out

    def describe(self) -> dict[str, Any]:
        return {
            "kind": self.kind,
            "n_splits": self.n_splits,
            "n_repeats": self.n_repeats,
            "shuffle": self.shuffle,
        }


class Simulation(Plan):
    """Fresh training sets from a known generative model ``y = truth(X) + noise``.

    With the truth known, squared bias and variance are measured exactly (up to Monte-Carlo
    error) at the evaluation points, and the noise variance is ``noise_sd ** 2``.

    Parameters
    ----------
    truth : callable
        ``truth(X) -> f`` with X of shape (m, p); returns m values.
    noise_sd : float
        Standard deviation of the Gaussian noise added to each training response (>= 0).
    x_sampler : callable or array-like
        ``x_sampler(rng, n) -> X`` draws a training design from a :class:`numpy.random.Generator`;
        an array gives a fixed design, used for every training set.
    n_train : int, optional
        Training-set size; defaults to the length of a fixed design.
    n_resamples : int, default=200
        Number of simulated training sets (>= 2).
    x_eval : array-like, optional
        The points where bias² and variance are measured. Defaults to the fixed design.

    Examples
    --------
    >>> import numpy as np
    >>> import complexity as cx
    >>> plan = cx.Simulation(lambda X: X[:, 0] ** 2, 0.1, np.linspace(0, 1, 20), n_resamples=50)
    >>> plan.describe()["n_train"]
    20
    """

    kind = "simulation"

    def __init__(
        self,
        truth: Callable[[NDArray[np.float64]], Any],
        noise_sd: float,
        x_sampler: Callable[[np.random.Generator, int], Any] | Any,
        n_train: int | None = None,
        n_resamples: int = 200,
        x_eval: Any = None,
    ) -> None:
        if not callable(truth):
            raise TypeError(
                f"truth must be a callable truth(X) -> values; got {_short_repr(truth)}."
            )
        self.truth = truth
        self.noise_sd = check_float("noise_sd", noise_sd, minimum=0.0)
        self.n_resamples = check_int("n_resamples", n_resamples, minimum=2)
        if callable(x_sampler):
            self.design = None
            if n_train is None:
                raise ValueError("n_train is required when x_sampler is a function; got None.")
        else:
            self.design = _as_points("x_sampler", x_sampler)
            if n_train is not None and n_train != len(self.design):
                raise ValueError(
                    f"n_train={n_train!r} differs from the fixed design's {len(self.design)} rows; "
                    "leave n_train=None for a fixed design."
                )
            n_train = len(self.design)
        self.x_sampler = x_sampler
        self.n_train = check_int("n_train", n_train, minimum=2)
        if x_eval is None:
            if self.design is None:
                raise ValueError("x_eval is required when x_sampler is a function; got None.")
            self.x_eval = self.design
        else:
            self.x_eval = _as_points("x_eval", x_eval)
        self.target = self.evaluate_truth(self.x_eval, "x_eval")

    def evaluate_truth(self, X: NDArray[np.float64], where: str) -> NDArray[np.float64]:
        """Call ``truth`` and check that it returns one finite value per row of ``X``."""
        try:
            f = np.asarray(self.truth(X.copy()), dtype=np.float64)
        except Exception as exc:
            raise ValueError(
                f"truth raised {type(exc).__name__}: {exc} (called on {where})."
            ) from exc
        if f.ndim == 2 and f.shape[1] == 1:
            f = f[:, 0]
        if f.shape != (X.shape[0],):
            raise ValueError(
                f"truth must return one value per row of its input; on {where} with {X.shape[0]} "
                f"rows it returned shape {f.shape}."
            )
        if not np.all(np.isfinite(f)):
            raise ValueError(f"truth returned NaN or infinite values on {where}.")
        return f

    def draw(self, seed: np.random.SeedSequence) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        """Draw one training set ``(X, y)`` from the generative model."""
        rng = np.random.default_rng(seed)
        if self.design is None:
            X = _as_points("x_sampler's output", self.x_sampler(rng, self.n_train))
            if X.shape[0] != self.n_train:
                raise ValueError(
                    f"x_sampler(rng, {self.n_train}) returned {X.shape[0]} rows; it must return n rows."
                )
            if X.shape[1] != self.x_eval.shape[1]:
                raise ValueError(
                    f"x_sampler returned {X.shape[1]} column(s) but x_eval has {self.x_eval.shape[1]}."
                )
        else:
            X = self.design
        f = self.evaluate_truth(X, "a training design")
        y = f + self.noise_sd * rng.standard_normal(self.n_train)
        return X, y

    def pilot_design(self, root: np.random.SeedSequence) -> NDArray[np.float64]:
        """All x a model of this plan will see, as far as knowable up front (for basis ranges)."""
        if self.design is not None:
            return np.vstack([self.design, self.x_eval])
        X, _ = self.draw(child_seed(root, STREAM_PILOT))
        return np.vstack([X, self.x_eval])

    def resamples(self, n, root, X=None, y=None, groups=None):
        everywhere = np.arange(self.x_eval.shape[0])
        return [Resample(b, b, None, everywhere, root, (b,)) for b in range(self.n_resamples)]

    def describe(self) -> dict[str, Any]:
        return {
            "kind": self.kind,
            "truth": getattr(self.truth, "__name__", repr(self.truth)),
            "noise_sd": self.noise_sd,
            "design": "fixed" if self.design is not None else "sampled",
            "n_train": self.n_train,
            "n_resamples": self.n_resamples,
            "n_eval": int(self.x_eval.shape[0]),
        }


def _as_points(name: str, value: Any) -> NDArray[np.float64]:
    try:
        arr = np.array(value, dtype=np.float64, copy=True)
    except (TypeError, ValueError):
        raise TypeError(f"{name} must be an array of numbers; got {_short_repr(value)}.") from None
    if arr.ndim == 1:
        arr = arr.reshape(-1, 1)
    if arr.ndim != 2 or arr.shape[0] == 0:
        raise ValueError(f"{name} must be a non-empty 1-D or 2-D array; got shape {arr.shape}.")
    if not np.all(np.isfinite(arr)):
        raise ValueError(f"{name} contains NaN or infinite values.")
    return arr


@dataclass(frozen=True)
class SplitLayout:
    """What the decomposition needs to know about a plan's training sets.

    Attributes
    ----------
    kind : str
        The plan's kind: "bootstrap", "cross-validation", "splitter" or "simulation".
    n_obs : int
        Number of observed rows (evaluation points for a simulation).
    train_size : float
        Mean number of training rows per resample (``n_obs`` for the bootstrap, which draws
        ``n_obs`` rows with replacement; ``n_train`` for a simulation).
    test_size : float
        Mean number of scored rows per resample.
    exchangeable : bool
        The training set of a held-out row is a uniformly random subset of the other rows (shuffled
        K-fold, repeated K-fold, random splits). Only then does the spread of a row's predictions
        across resamples scale to a sampling variance (delete-d jackknife).
    partition : bool
        Every replicate scores each row once (K-fold passes), so a per-pass fold standard error is
        defined.
    replicate_of : ndarray of int or None
        The replicate of every resample (None for the bootstrap and simulations: each resample is
        its own replicate).
    reason : str
        Why ``exchangeable`` is False (empty otherwise).

    Examples
    --------
    >>> import numpy as np
    >>> import complexity as cx
    >>> plan = cx.CrossValidation(5, n_repeats=2)
    >>> layout = split_layout(plan, plan.resamples(20, np.random.SeedSequence(0)), 20)
    >>> layout.train_size, layout.exchangeable, layout.partition, layout.replicate_of.tolist()
    (16.0, True, True, [0, 0, 0, 0, 0, 1, 1, 1, 1, 1])
    """

    kind: str
    n_obs: int
    train_size: float
    test_size: float
    exchangeable: bool
    partition: bool
    replicate_of: NDArray[np.intp] | None = None
    reason: str = ""


def split_layout(plan: Plan, resamples: Sequence[Resample], n_obs: int) -> SplitLayout:
    """Describe a plan's training sets for the decomposition (see :class:`SplitLayout`).

    Parameters
    ----------
    plan : Plan
    resamples : sequence of Resample
        The plan's resamples (only read for K-fold and splitters; the bootstrap's lazy list is
        never drawn here).
    n_obs : int
        Number of observed rows.

    Returns
    -------
    SplitLayout

    Examples
    --------
    >>> import numpy as np
    >>> import complexity as cx
    >>> plan = cx.Bootstrap(10)
    >>> split_layout(plan, plan.resamples(30, np.random.SeedSequence(0)), 30).train_size
    30.0
    """
    if isinstance(plan, Simulation):
        return SplitLayout(plan.kind, n_obs, float(plan.n_train), float(n_obs), False, False)
    if isinstance(plan, Bootstrap):
        return SplitLayout(plan.kind, n_obs, float(n_obs), n_obs * 0.368, True, False)
    # only a Simulation has resamples without training rows, and it returned above
    train = np.array([len(r.train) for r in resamples if r.train is not None], dtype=np.float64)
    test = np.array([len(r.test) for r in resamples], dtype=np.float64)
    replicate_of = np.array([r.replicate for r in resamples], dtype=np.intp)
    # no row is scored twice within a replicate (K-fold by construction; the splitter adapter
    # starts a new replicate when a row comes back), so a replicate is a partition exactly when
    # its test sets add up to every row
    partition = bool((np.bincount(replicate_of, weights=test) == n_obs).all())
    if isinstance(plan, CrossValidation):
        exchangeable = plan.shuffle
        reason = (
            ""
            if exchangeable
            else (
                "CrossValidation(shuffle=False) cuts contiguous folds, which are not random subsets "
                "of the rows"
            )
        )
    else:
        exchangeable, reason = splitter_exchangeable(getattr(plan, "splitter", plan))
    return SplitLayout(
        plan.kind,
        n_obs,
        float(train.mean()),
        float(test.mean()),
        exchangeable,
        partition,
        replicate_of,
        reason,
    )


def default_plan(n: int) -> CrossValidation:
    """The plan a sweep uses when none is given: 10-fold cross-validation repeated 10 times.

    Chosen by measurement (see the README): on the NIST StRD polynomial sets it recommends the
    degree that the sequential nested F test supports (Filip: 11, as the F test at 5 %; the
    bootstrap's out-of-bag fits extrapolate at the range ends whenever an end point is left out,
    and picked 6), and its standard error does not shrink with the repeats. With fewer than 10
    rows it is leave-one-out (repeats would repeat the same folds).

    Examples
    --------
    >>> default_plan(200)
    CrossValidation(n_splits=10, n_repeats=10, shuffle=True)
    >>> default_plan(6)
    CrossValidation(n_splits=6, n_repeats=1, shuffle=True)
    """
    k = max(2, min(10, int(n)))
    return CrossValidation(k, n_repeats=10 if n > k else 1)


def as_plan(plan: Any) -> Plan:
    """Accept a :class:`Plan`, any scikit-learn splitter, or an int K (K-fold shorthand)."""
    if isinstance(plan, Plan):
        return plan
    if isinstance(plan, numbers.Integral) and not isinstance(plan, bool):
        return CrossValidation(int(plan))
    if not isinstance(plan, (str, bytes)) and callable(getattr(plan, "split", None)):
        return _SplitterPlan(plan)
    raise TypeError(
        "plan must be cx.Bootstrap(...), cx.CrossValidation(...), cx.Simulation(...), a "
        f"scikit-learn splitter (an object with split(X, y, groups)) or an int; got {_short_repr(plan)}."
    )
