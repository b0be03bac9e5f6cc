"""Generic engine: one clone-and-fit per (resample, capacity), through ``joblib.Parallel``.

Works for any scikit-learn regressor. Resamples are grouped into chunks (one joblib task each);
each chunk returns its outcomes in resample order and joblib returns chunks in submission order,
so the outcomes, and everything computed from them, are identical for any ``n_jobs`` and any
joblib backend (including ``joblib.parallel_config(backend="dask")``).
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Sequence
from typing import Any

import numpy as np
from numpy.typing import NDArray
from sklearn.base import clone

from .._contract import FullFit, Outcome, Problem
from ..accumulate import Tally, tallies
from ..accumulate import block_size as _points_block_size
from ..plans import STREAM_ESTIMATOR, STREAM_FULL_FIT, Resample, child_seed
from ._dispatch import chunk_length, map_chunks, slices

__all__ = ["block_size", "fit_full", "run", "run_tallies"]


def _random_state_keys(model: Any) -> list[str]:
    """The ``random_state`` parameters of ``model`` left as None, in sorted order."""
    params = model.get_params(deep=True)
    return sorted(
        k
        for k, v in params.items()
        if (k == "random_state" or k.endswith("__random_state")) and v is None
    )


def _seed_estimator(model: Any, seed: np.random.SeedSequence, keys: list[str] | None = None) -> Any:
    """Clone ``model``; set every ``random_state`` left as None to an int drawn from ``seed``.

    Keys are visited in sorted order so the assignment is deterministic. ``keys`` may be given
    (from :func:`_random_state_keys` of the same model) to skip looking them up on every fit.
    """
    est = clone(model)
    if keys is None:
        keys = _random_state_keys(est)
    if keys:
        draws = np.random.default_rng(seed).integers(0, 2**31 - 1, size=len(keys))
        est.set_params(**{k: int(d) for k, d in zip(keys, draws)})
    return est


def _fit_one(
    model: Any,
    seed: np.random.SeedSequence,
    X: NDArray[np.float64],
    y: NDArray[np.float64],
    w: NDArray[np.float64] | None,
    X_eval: NDArray[np.float64],
    keys: list[str] | None = None,
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Fit one clone; return (predictions on X, predictions on X_eval). Raises on failure."""
    est = _seed_estimator(model, seed, keys)
    if w is None:
        est.fit(X, y)
    else:
        est.fit(X, y, **_weight_kwargs(est, w))
    pred_train = np.asarray(est.predict(X), dtype=np.float64).reshape(-1)
    pred_eval = (
        np.asarray(est.predict(X_eval), dtype=np.float64).reshape(-1)
        if X_eval.shape[0]
        else np.empty(0)
    )
    for pred, rows in ((pred_train, X.shape[0]), (pred_eval, X_eval.shape[0])):
        if pred.shape[0] != rows:
            raise ValueError(
                f"predict returned {pred.shape[0]} values for {rows} rows; a regressor must "
                "return one prediction per row"
            )
    if not (np.all(np.isfinite(pred_train)) and np.all(np.isfinite(pred_eval))):
        raise FloatingPointError("the fitted model returned NaN or infinite predictions")
    return pred_train, pred_eval


def _weight_kwargs(est: Any, w: NDArray[np.float64]) -> dict[str, Any]:
    """Route sample weights to the final step of a pipeline, or to the estimator itself."""
    steps = getattr(est, "steps", None)
    if steps:
        return {f"{steps[-1][0]}__sample_weight": w}
    return {"sample_weight": w}


def _message(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()
    return f"{type(exc).__name__}: {text[0] if text else ''}".rstrip(": ")


def _one_resample(problem: Problem, r: Resample, keys: list[list[str]]) -> Outcome:
    C = problem.n_capacities
    X_tr, y_tr, w = problem.training_set(r)
    X_ev = problem.X_eval[r.test]
    target = problem.target[r.test]
    residuals = np.full((r.test.size, C), np.nan)
    train_mse = np.full(C, np.nan)
    failures: dict[int, str] = {}
    for c, model in enumerate(problem.models):
        reason = problem.ladder.training_shortfall(c, X_tr)
        if reason is not None:
            failures[c] = reason
            continue
        try:
            pred_tr, pred_ev = _fit_one(
                model,
                child_seed(problem.root, STREAM_ESTIMATOR, r.index, c),
                X_tr,
                y_tr,
                w,
                X_ev,
                keys[c],
            )
        except Exception as exc:  # a failing fit is recorded, the sweep goes on
            failures[c] = _message(exc)
            continue
        residuals[:, c] = pred_ev - target
        train_mse[c] = float(np.mean((pred_tr - y_tr) ** 2))
    return Outcome(r.index, r.replicate, r.test, residuals, train_mse, failures)


def _fit_chunk(problem: Problem, chunk: Sequence[Resample]) -> list[Outcome]:
    """Outcomes of a chunk of resamples, fitted in order."""
    keys = [_random_state_keys(m) for m in problem.models]  # once per chunk, not per fit
    return [_one_resample(problem, r, keys) for r in chunk]


def run(
    problem: Problem,
    resamples: Sequence[Resample],
    *,
    n_jobs: int | None = None,
    on_done: Callable[[int], None] | None = None,
) -> Iterator[Outcome]:
    """Yield the outcome of every resample, in order.

    Parameters
    ----------
    problem : Problem
    resamples : sequence of Resample
    n_jobs : int or None
        Passed to :class:`joblib.Parallel` (None: the active ``parallel_config``, else 1).
    on_done : callable, optional
        Called with the number of fits finished, after each chunk (for progress display).
    """
    yield from _run_with(_fit_chunk, problem, resamples, n_jobs=n_jobs, on_done=on_done)


def _run_with(
    fit_chunk: Callable[[Problem, Sequence[Resample]], list[Outcome]],
    problem: Problem,
    resamples: Sequence[Resample],
    *,
    n_jobs: int | None,
    on_done: Callable[[int], None] | None,
) -> Iterator[Outcome]:
    """Yield ``fit_chunk``'s outcomes chunk by chunk, in order (shared with the ranked engine)."""
    # a generator of slices: joblib draws a few tasks ahead, so only those chunks' index arrays
    # exist at any time
    chunks = slices(resamples, chunk_length(len(resamples), n_jobs))
    C = problem.n_capacities
    for outcomes in map_chunks(
        fit_chunk,
        (problem,),
        chunks,
        n_jobs=n_jobs,
        size=lambda outcomes: len(outcomes) * C,
        on_done=on_done,
    ):
        yield from outcomes


def block_size(problem: Problem) -> int:
    """Resamples per accumulation block (a function of the problem's size only)."""
    return _points_block_size(problem.X_eval.shape[0], problem.n_capacities)


def run_tallies(
    problem: Problem,
    resamples: Sequence[Resample],
    *,
    n_jobs: int | None = None,
    on_done: Callable[[int], None] | None = None,
) -> Iterator[Tally]:
    """Yield the :class:`~complexity.accumulate.Tally` of every block of resamples, in order.

    Fits dominate here, so the outcomes come back from the workers and are tallied as they
    arrive, by :func:`block_size` blocks (the same blocks a checkpointed sweep uses).
    """
    yield from _tally_blocks(problem, run(problem, resamples, n_jobs=n_jobs, on_done=on_done))


def _tally_blocks(problem: Problem, outcomes: Iterator[Outcome]) -> Iterator[Tally]:
    """Tally ``outcomes`` by :func:`block_size` blocks (shared with the ranked engine)."""
    n_points, C = problem.X_eval.shape[0], problem.n_capacities
    yield from tallies(outcomes, block_size(problem), n_points, C)


def fit_full(problem: Problem) -> FullFit:
    """Fit every capacity once on all the data (used for training error and .632 corrections)."""
    assert problem.X is not None and problem.y is not None
    X, y = problem.X, problem.y
    C = problem.n_capacities
    fitted = np.full((X.shape[0], C), np.nan)
    train_mse = np.full(C, np.nan)
    failures: dict[int, str] = {}
    for c, model in enumerate(problem.models):
        try:
            pred, _ = _fit_one(
                model,
                child_seed(problem.root, STREAM_FULL_FIT, c),
                X,
                y,
                problem.sample_weight,
                X[:0],
            )
        except Exception as exc:
            failures[c] = _message(exc)
            continue
        fitted[:, c] = pred
        train_mse[c] = float(np.mean((pred - y) ** 2))
    return FullFit(fitted, train_mse, failures)
