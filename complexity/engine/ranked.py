"""Ranked feature ladders by least squares: rank, then every count from one QR, per resample.

A :class:`~complexity.FeatureLadder` with a ranked order (``"correlation"``, ``"f-test"`` or a
callable) and the default estimator recomputes its ranking inside every training set. This
engine does what the generic engine's pipelines do, once per resample instead of once per
(resample, count): it ranks the training rows with the same function
(:func:`complexity._ranking.ranking`), takes the centred training columns in that order, and
fits all the nested counts from one thin QR factorisation (the fit on the first k ranked
columns uses the leading k x k block of R). Predictions out of bag feed the same outcomes the
generic engine yields. A resample whose training set is too small or whose ranked design is
numerically rank deficient is handed to the generic engine, so its answer is the generic one.
Sample weights and simulations are left to the generic engine.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Sequence
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy.linalg import solve_triangular

from .._contract import Outcome, Problem
from .._ranking import ranking
from ..accumulate import Tally
from ..plans import Resample, Simulation
from . import generic

__all__ = ["block_size", "fit_full", "run", "run_tallies", "supports"]

_RANK_TOLERANCE = 1e-10  # |R_kk| below this share of the column's centred norm: rank deficient


def supports(problem: Problem) -> bool:
    """True for a ranked least-squares FeatureLadder on observed data without sample weights.

    Examples
    --------
    >>> import numpy as np
    >>> import complexity as cx
    >>> from complexity._contract import Problem
    >>> X = np.random.default_rng(0).normal(size=(20, 3)); y = X[:, 0]
    >>> ladder = cx.FeatureLadder([1, 2], order="correlation")
    >>> problem = Problem(ladder, ladder.build(X), X, y, X, y, cx.Bootstrap(5),
    ...                   np.random.SeedSequence(0), X)
    >>> supports(problem)
    True
    """
    ladder = problem.ladder
    return (
        getattr(ladder, "ranked", False) is True
        and getattr(ladder, "estimator", "user") is None
        and problem.sample_weight is None
        and not isinstance(problem.plan, Simulation)
        and problem.X is not None
    )


def _nested_fit(
    X_tr: NDArray[np.float64], y_tr: NDArray[np.float64], cols: NDArray[np.intp], counts: list[int]
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """Slopes (top, C), training means of the columns and y, and training MSEs (C,).

    Raises ``np.linalg.LinAlgError`` when the ranked design loses rank within the top count.
    """
    X_ranked = X_tr[:, cols]
    xbar = X_ranked.mean(axis=0)
    ybar = float(y_tr.mean())
    Xc = X_ranked - xbar
    yc = y_tr - ybar
    top = cols.size
    B = np.zeros((top, len(counts)))
    if top == 0:
        return B, xbar, np.array([ybar]), np.full(len(counts), float(np.mean(yc**2)))
    Q, R = np.linalg.qr(Xc)
    norms = np.sqrt(np.einsum("ij,ij->j", Xc, Xc))
    if np.any(np.abs(np.diag(R)) <= _RANK_TOLERANCE * np.maximum(norms, np.finfo(float).tiny)):
        raise np.linalg.LinAlgError("ranked training design is rank deficient")
    z = Q.T @ yc
    fitted = np.cumsum(Q * z[None, :], axis=1)  # column k-1: fit on the first k ranked columns
    mse = np.empty(len(counts))
    for c, k in enumerate(counts):
        if k == 0:
            mse[c] = float(np.mean(yc**2))
            continue
        B[:k, c] = solve_triangular(R[:k, :k], z[:k])
        mse[c] = float(np.mean((yc - fitted[:, k - 1]) ** 2))
    return B, xbar, np.array([ybar]), mse


def _one_resample(problem: Problem, r: Resample) -> Outcome | None:
    """The outcome of resample ``r``; None where the generic engine must fit it."""
    ladder: Any = problem.ladder  # a ranked FeatureLadder (see supports)
    counts = [int(k) for k in ladder.counts]
    X_tr, y_tr, _ = problem.training_set(r)
    if any(ladder.training_shortfall(c, X_tr) for c in range(len(counts))):
        return None
    top = max(counts)
    cols = ranking(ladder.order, X_tr, y_tr, top)[:top].astype(np.intp)
    try:
        B, xbar, ybar, mse = _nested_fit(X_tr, y_tr, cols, counts)
    except np.linalg.LinAlgError:
        return None
    pred = (problem.X_eval[r.test][:, cols] - xbar) @ B + ybar[0]
    residuals = pred - problem.target[r.test][:, None]
    return Outcome(r.index, r.replicate, r.test, residuals, mse, {})


def _fit_chunk(problem: Problem, chunk: Sequence[Resample]) -> list[Outcome]:
    """Outcomes of a chunk of resamples, in order (the generic engine's for any it hands over)."""
    out = []
    keys: list[list[str]] = [[] for _ in problem.models]  # LinearRegression draws no seeds
    for r in chunk:
        outcome = _one_resample(problem, r)
        out.append(outcome if outcome is not None else generic._one_resample(problem, r, keys))
    return out


def run(
    problem: Problem,
    resamples: Sequence[Resample],
    *,
    n_jobs: int | None = None,
    on_done: Callable[[int], None] | None = None,
) -> Iterator[Outcome]:
    """Yield the outcome of every resample, in order (identical for any ``n_jobs``).

    Examples
    --------
    >>> import numpy as np
    >>> import complexity as cx
    >>> from complexity._contract import Problem
    >>> rng = np.random.default_rng(0)
    >>> X = rng.normal(size=(40, 3)); y = X @ [1.0, 0.5, 0.0] + rng.normal(0, 0.1, 40)
    >>> ladder, plan = cx.FeatureLadder([1, 2, 3], order="correlation"), cx.Bootstrap(3)
    >>> root = np.random.SeedSequence(0)
    >>> problem = Problem(ladder, ladder.build(X), X, y, X, y, plan, root, X)
    >>> [o.residuals.shape[1] for o in run(problem, plan.resamples(40, root))]
    [3, 3, 3]
    """
    yield from generic._run_with(_fit_chunk, problem, resamples, n_jobs=n_jobs, on_done=on_done)


def block_size(problem: Problem) -> int:
    """Resamples per accumulation block: the generic engine's, so blocks match it."""
    return generic.block_size(problem)


def run_tallies(
    problem: Problem,
    resamples: Sequence[Resample],
    *,
    n_jobs: int | None = None,
    on_done: Callable[[int], None] | None = None,
) -> Iterator[Tally]:
    """Yield the tally of every :func:`block_size` block of resamples, in order."""
    outcomes = run(problem, resamples, n_jobs=n_jobs, on_done=on_done)
    yield from generic._tally_blocks(problem, outcomes)


def fit_full(problem: Problem) -> Any:
    """Every count once on all the data: the generic engine's fit (one ranking, few fits)."""
    return generic.fit_full(problem)
