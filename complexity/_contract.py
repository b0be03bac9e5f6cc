"""The contract between the sweep and its engines: what goes in, what comes back.

- :class:`Problem`: everything an engine needs, fixed before any fitting starts.
- :class:`Outcome`: what one resample contributes (residuals at its evaluation points).
- :class:`FullFit`: every capacity fitted once on all the data.
- :class:`Engine`: the four functions an engine provides (a module satisfies it).

Nothing here imports an engine, the sweep or anything that presents results, so every stage
of a sweep can depend on this module and data flows one way.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Protocol, runtime_checkable

import numpy as np
from numpy.typing import NDArray

from .plans import Plan, Resample, Simulation

if TYPE_CHECKING:
    from .accumulate import Tally
    from .ladders import Ladder

__all__ = ["Engine", "FullFit", "Outcome", "Problem"]


@dataclass(frozen=True)
class Problem:
    """Everything an engine needs, fixed before any fitting starts.

    Attributes
    ----------
    ladder : Ladder
    models : list
        One unfitted estimator per capacity, built once from the full data (so data-derived
        settings such as a polynomial's x range are the same for every resample).
    X, y : ndarray or None
        The observed data (None for a simulation without data).
    X_eval : ndarray of shape (m, p)
        Evaluation points: the rows of X for data plans, ``x_eval`` for a simulation.
    target : ndarray of shape (m,)
        What a prediction at an evaluation point is compared with: y for data plans, the truth
        for a simulation. Residuals are ``prediction - target``.
    plan : Plan
    root : numpy.random.SeedSequence
    design_X : ndarray
        The x values the models' data-derived settings were taken from (X, or for a simulation
        its fixed design or a pilot draw together with ``x_eval``).
    groups : array or None
    sample_weight : ndarray or None
        Per-row weights passed to the estimator's fit (data plans only).
    feature_names : tuple of str or None
        The predictors' names (DataFrame columns), used to label coefficients.
    """

    ladder: Ladder
    models: list[Any]
    X: NDArray[np.float64] | None
    y: NDArray[np.float64] | None
    X_eval: NDArray[np.float64]
    target: NDArray[np.float64]
    plan: Plan
    root: np.random.SeedSequence
    design_X: NDArray[np.float64]
    groups: Any = None
    sample_weight: NDArray[np.float64] | None = None
    feature_names: tuple[str, ...] | None = None

    @property
    def n_capacities(self) -> int:
        return len(self.models)

    @property
    def simulated(self) -> bool:
        return isinstance(self.plan, Simulation)

    def training_set(
        self, r: Resample
    ) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64] | None]:
        """The training rows ``(X, y, sample_weight)`` of resample ``r``."""
        if isinstance(self.plan, Simulation):
            X, y = self.plan.draw(r.seed)
            return X, y, None
        assert self.X is not None and self.y is not None and r.train is not None
        w = None if self.sample_weight is None else self.sample_weight[r.train]
        return self.X[r.train], self.y[r.train], w


@dataclass
class Outcome:
    """What one resample contributes: residuals at its evaluation points, for every capacity.

    Attributes
    ----------
    index, replicate : int
        As in the resample.
    test : ndarray of int, shape (m,)
        Evaluation points scored.
    residuals : ndarray of shape (m, n_capacities)
        ``prediction - target``; a column of NaN where the fit at that capacity failed.
    train_mse : ndarray of shape (n_capacities,)
        Mean squared error of each fit on its own training set (NaN where it failed).
    failures : dict
        Capacity position -> message, for the fits that failed.
    """

    index: int
    replicate: int
    test: NDArray[np.intp]
    residuals: NDArray[np.float64]
    train_mse: NDArray[np.float64]
    failures: dict[int, str] = field(default_factory=dict)


@dataclass
class FullFit:
    """Every capacity fitted once on all the data.

    Attributes
    ----------
    fitted : ndarray of shape (n, n_capacities)
        In-sample predictions (NaN where the fit failed).
    train_mse : ndarray of shape (n_capacities,)
        The apparent (training) error of each full-data fit.
    failures : dict
        Capacity position -> message.
    criteria : pandas.DataFrame or None
        Closed-form criteria per capacity (least-squares ladders only).
    diagnostics : pandas.DataFrame or None
        Conditioning and coefficient-size diagnostics per capacity (least-squares ladders only).
    coefficients : dict or None
        Capacity value -> DataFrame of coefficients in the user's units (``estimate``,
        ``std_error``), indexed by term (least-squares ladders only).
    notes : list of str
        Findings of the full-data fit worth telling the user, one line each (for example that
        the data fit exactly to rounding level from some capacity on).
    leverage : ndarray of shape (n_capacities, n) or None
        Hat-matrix diagonals of the full-data fits (least-squares ladders only; NaN rows where
        the fit failed).
    """

    fitted: NDArray[np.float64]
    train_mse: NDArray[np.float64]
    failures: dict[int, str] = field(default_factory=dict)
    criteria: Any = None
    diagnostics: Any = None
    coefficients: Mapping[Any, Any] | None = None
    notes: list[str] = field(default_factory=list)
    leverage: NDArray[np.float64] | None = None


@runtime_checkable
class Engine(Protocol):
    """What :func:`complexity.sweep` needs of an engine (each engine module provides these).

    ``run`` yields one :class:`Outcome` per resample, in resample order, whatever the number
    of workers; ``run_tallies`` yields one :class:`~complexity.accumulate.Tally` per block of
    ``block_size(problem)`` consecutive resamples, equal bit for bit to the tallies of
    ``run``'s outcomes grouped the same way; ``fit_full`` fits every capacity once on all the
    data.

    Examples
    --------
    >>> from complexity._contract import Engine
    >>> from complexity.engine import generic
    >>> isinstance(generic, Engine)
    True
    """

    def run(
        self,
        problem: Problem,
        resamples: Sequence[Resample],
        *,
        n_jobs: int | None = None,
        on_done: Callable[[int], None] | None = None,
    ) -> Iterator[Outcome]: ...

    def run_tallies(
        self,
        problem: Problem,
        resamples: Sequence[Resample],
        *,
        n_jobs: int | None = None,
        on_done: Callable[[int], None] | None = None,
    ) -> Iterator[Tally]: ...

    def block_size(self, problem: Problem) -> int: ...

    def fit_full(self, problem: Problem) -> FullFit: ...
