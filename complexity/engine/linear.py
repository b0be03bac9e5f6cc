"""The exact engine: every capacity of every resample of a least-squares ladder, batched.

A module satisfying :class:`complexity._contract.Engine` (``run``, ``run_tallies``,
``block_size``, ``fit_full``) for ladders whose :meth:`~complexity.ladders.Ladder.nested_design`
is not None. One reference factorisation serves every resample of a plan; each chunk of
resamples gets its Gram matrices from one matrix product and small per-resample Cholesky
factorisations, with a QR fallback where a Gram matrix is badly conditioned (the numerics and
their notation: :mod:`complexity.engine._batched`). Chunks go to joblib through
:mod:`complexity.engine._dispatch`; the fit on all data is :mod:`complexity.engine.full_fit`.

Sample weights w (weighted least squares): a training set's weight of row i becomes
c_i w_i (its multiplicity times its weight), so the Gram matrices still come from one product
per chunk and each fit equals scikit-learn's ``LinearRegression().fit(X[train], y[train],
sample_weight=w[train])``. What is scored stays as the generic engine scores it: residuals at
the evaluation points unweighted, and the training error the plain mean of squared residuals
over the training rows (with multiplicity), sum_i c_i e_i^2 / sum_i c_i, computed from the
residuals themselves (the weighted RSS of the tail sums is a different quantity).
"""

from __future__ import annotations

import os
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .._contract import Outcome, Problem
from .._validation import row_groups
from ..accumulate import Tally, TallyBuilder, tally
from ..plans import Simulation
from . import _batched
from ._batched import (
    Reference,
    chunk_size,
    failed_mask,
    from_gram,
    from_rows,
    moments,
    nested_coefficients,
    products,
    reference,
    tail_sums,
)
from ._dispatch import call_with_single_blas, group_by_index, map_chunks, single_blas
from ._exact_problem import design_of, not_served, rank_message, supports
from .full_fit import fit_full, variance_leverage

__all__ = ["block_size", "fit_full", "run", "run_tallies", "supports", "variance_leverage"]

_GRAM_CONDITION_LIMIT = 1e6  # above this (upper bound of cond(G_c)) a resample is refit by QR
_RSS_CANCELLATION = 1e-4  # RSS below this share of y'Cy is recomputed from residuals


def block_size(problem: Problem) -> int:
    """Resamples per accumulation block: the engine's chunk (tallied where it is computed).

    Examples
    --------
    >>> import numpy as np
    >>> import complexity as cx
    >>> from complexity.engine import Problem
    >>> X = np.linspace(0, 1, 40)[:, None]
    >>> ladder = cx.PolynomialLadder(range(0, 11))
    >>> problem = Problem(ladder, ladder.build(X), X, X[:, 0], X, X[:, 0], cx.Bootstrap(5),
    ...                   np.random.SeedSequence(0), X)
    >>> block_size(problem)
    1000
    """
    design = design_of(problem)
    if design is None:
        raise ValueError(not_served(problem))
    return chunk_size(_reference_rows(problem).shape[0], problem.n_capacities, design.n_design)


def _reference_rows(problem: Problem) -> NDArray[np.float64]:
    """The x rows the reference factorisation is made on: the data, or a simulation's fixed
    design (else its pilot draw with ``x_eval``)."""
    if not problem.simulated:
        assert problem.X is not None
        return problem.X
    plan = problem.plan
    assert isinstance(plan, Simulation)
    return plan.design if plan.design is not None else problem.design_X


# -------------------------------------------------------------------- one chunk of resamples


def _fail_capacities(
    problem: Problem,
    ref: Reference,
    distinct: int,
    pv: int,
    X_train_fn: Any,
    where: str = "training",
) -> dict[int, str]:
    """Failures of one resample: too few distinct rows (ladder's own message) or rank loss."""
    out: dict[int, str] = {}
    for c, k in enumerate(ref.n_cols):
        if k <= pv:
            continue
        message = None
        if distinct < k:
            message = problem.ladder.training_shortfall(c, X_train_fn())
        out[c] = message or rank_message(problem, c, where)
    return out


@dataclass
class _ChunkFits:
    """Every capacity fitted on every training set of a chunk of data resamples."""

    pos: NDArray[np.intp]  # row of each resample in the chunk's arrays
    counts: NDArray[np.float64]  # (S, n) multiplicity of each row in each training set
    weights: NDArray[np.float64]  # (S, n) training weight: counts, times the sample weights
    A1: NDArray[np.float64]  # (S, P + 1, C): residuals of all rows = Q0_target @ A1[s]
    rss: NDArray[np.float64]  # (S, C) training sum of squared residuals (unweighted)
    distinct: NDArray[np.intp]  # (S,) distinct training rows
    pv: NDArray[np.intp]  # (S,) usable basis columns
    every_row: NDArray[np.float64] | None  # (S, n, C) residuals at every row (small problems)
    short: NDArray[np.bool_]  # (S,) fewer usable columns than the top capacity: some fits fail


def _chunk_fits(
    problem: Problem, ref: Reference, shared: dict[str, Any], chunk: Sequence[Any]
) -> _ChunkFits:
    """Fit every capacity on every training set of the chunk (data plans)."""
    Q0, S, P = ref.Q0, ref.chunk, ref.pv
    n = Q0.shape[0]
    yc = shared["yc"]
    pos = np.array([r.index % S for r in chunk], dtype=np.intp)
    counts = np.zeros((S, n))
    for r, s in zip(chunk, pos):
        counts[s] = r.counts if r.counts is not None else np.bincount(r.train, minlength=n)
    sw = shared["sample_weight"]
    weights = counts if sw is None else counts * sw[None, :]
    # the one big product: every Gram matrix, Q^T diag(c) y and y^T diag(c) y of the chunk
    summed = moments(weights, Q0, yc, shared)
    iu = shared["iu"]
    m = iu[0].size
    G = np.zeros((S, P, P))
    G[:, iu[0], iu[1]] = summed[:, :m]
    G[:, iu[1], iu[0]] = summed[:, :m]
    g = summed[:, m : m + P]
    yy = summed[:, m + P]

    # distinct training rows -> the capacities that can be fitted at all (a leading run)
    if shared["n_unique"] == n:
        distinct = np.count_nonzero(weights, axis=1)
    else:
        uid = shared["uid"]
        distinct = np.zeros(S, dtype=np.intp)
        for s in pos:
            distinct[s] = np.unique(uid[weights[s] > 0]).size
    fits = ref.n_cols[None, :] <= np.minimum(distinct, P)[:, None]
    pv = np.max(np.where(fits, ref.n_cols[None, :], 0), axis=1)

    Tinv, w, cond_bound, ok = from_gram(G, g, pv)
    in_prefix = np.arange(P)[None, :] < pv[:, None]
    redo = ~ok | np.any(in_prefix & (cond_bound > _GRAM_CONDITION_LIMIT), axis=1)
    for s in np.flatnonzero(redo[pos]):
        s = pos[s]
        rows = np.flatnonzero(weights[s])
        root_c = np.sqrt(weights[s, rows])
        Tinv[s], w[s], pv[s] = from_rows(Q0[rows] * root_c[:, None], root_c * yc[rows], pv[s])

    A = nested_coefficients(Tinv, w, ref.n_cols)  # (S, P, C)
    C = ref.n_cols.size
    # residuals = [Q0, ybar - target] @ [[A], [1 ... 1]]: one product per resample gives
    # prediction - target for every capacity at its test rows
    Q0t = shared["Q0_target"]
    A1 = np.concatenate([A, np.ones((S, 1, C))], axis=1)
    # small problems: every row at once (one stacked product), then pick each test set
    every_row = np.matmul(Q0t[None], A1) if n * P * C <= 200_000 else None
    short = pv < int(ref.n_cols.max())
    if sw is not None:
        rss = _plain_sse(counts, pos, Q0t, A1, every_row)
        return _ChunkFits(pos, counts, weights, A1, rss, distinct, pv, every_row, short)
    # training RSS of the largest usable fit: y'Cy - |w|^2 when that keeps >= 12 digits, else
    # (nearly exact fits, QR-refitted resamples) directly from its residuals
    rss_top = yy - np.sum(w**2, axis=1)
    direct = redo | (rss_top < _RSS_CANCELLATION * yy)
    for s in np.flatnonzero(direct[pos]):
        s = pos[s]
        rows = np.flatnonzero(counts[s])
        resid = yc[rows] - Q0[rows] @ (Tinv[s] @ w[s])
        rss_top[s] = float(np.sum(counts[s, rows] * resid**2))
    rss = rss_top[:, None] + tail_sums(w)[:, np.minimum(ref.n_cols, P)]  # (S, C)
    return _ChunkFits(pos, counts, weights, A1, rss, distinct, pv, every_row, short)


def _plain_sse(
    counts: NDArray[np.float64],
    pos: NDArray[np.intp],
    Q0t: NDArray[np.float64],
    A1: NDArray[np.float64],
    every_row: NDArray[np.float64] | None,
) -> NDArray[np.float64]:
    """``sum_i c_i e_i^2`` per resample and capacity, from the residuals at the training rows.

    A weighted fit's plain (unweighted) training error is not a tail sum of its weighted
    factorisation, so it is computed from the residuals directly: no cancellation.
    """
    out = np.zeros((counts.shape[0], A1.shape[2]))
    for s in pos:
        if every_row is not None:
            out[s] = counts[s] @ every_row[s] ** 2
            continue
        rows = np.flatnonzero(counts[s])
        out[s] = counts[s, rows] @ (np.take(Q0t, rows, axis=0) @ A1[s]) ** 2
    return out


def _chunk_failures(
    problem: Problem, ref: Reference, fits: _ChunkFits, r: Any, s: int
) -> dict[int, str]:
    """The capacities resample ``r`` (at row ``s``) could not fit, with messages."""
    if not fits.short[s]:
        return {}
    X = problem.X
    assert X is not None
    return _fail_capacities(
        problem, ref, int(fits.distinct[s]), int(fits.pv[s]), lambda: X[r.train]
    )


def _data_chunk(
    problem: Problem, ref: Reference, shared: dict[str, Any], chunk: Sequence[Any]
) -> list[Outcome]:
    """Outcomes for resamples of the observed data (bootstrap, folds, any splitter)."""
    return _outcomes(problem, ref, shared, chunk, _chunk_fits(problem, ref, shared, chunk))


def _outcomes(
    problem: Problem,
    ref: Reference,
    shared: dict[str, Any],
    chunk: Sequence[Any],
    fits: _ChunkFits,
) -> list[Outcome]:
    Q0t, C = shared["Q0_target"], ref.n_cols.size
    out = []
    for r, s in zip(chunk, fits.pos):
        failures = _chunk_failures(problem, ref, fits, r, s)
        if fits.every_row is not None:
            residuals = fits.every_row[s, r.test]
        else:
            residuals = np.take(Q0t, r.test, axis=0) @ fits.A1[s]
        train_mse = fits.rss[s] / fits.counts[s].sum()  # the training set's size
        if failures:
            bad = failed_mask(failures, C)
            residuals[:, bad] = np.nan
            train_mse[bad] = np.nan
        out.append(Outcome(r.index, r.replicate, r.test, residuals, train_mse, failures))
    return out


def _simulation_chunk(
    problem: Problem, ref: Reference, shared: dict[str, Any], chunk: Sequence[Any]
) -> list[Outcome]:
    """Outcomes for simulated training sets (fixed design: one basis, many y)."""
    Q0, S, P = ref.Q0, ref.chunk, ref.pv
    q_eval, target = shared["q_eval"], problem.target
    C = ref.n_cols.size
    out = []
    if shared["fixed"]:
        n = Q0.shape[0]
        Y = np.zeros((n, S))
        means = np.zeros(S)
        pos = [r.index % S for r in chunk]
        for r, s in zip(chunk, pos):
            _, y = problem.training_set(r)[:2]
            means[s] = float(np.mean(y))
            Y[:, s] = y - means[s]
        W = (Q0.T @ Y).T  # (S, P): G = I on the fixed design, so w = Q0^T y
        k_top = shared["pv_fixed"]
        W[:, k_top:] = 0.0
        A = W[:, :, None] * (np.arange(P)[:, None] < ref.n_cols[None, :])[None]  # (S, P, C)
        resid_top = Y.T - W @ Q0.T
        rss = np.sum(resid_top**2, axis=1)[:, None] + tail_sums(W)[:, np.minimum(ref.n_cols, P)]
        failures = shared["fixed_failures"]
        bad = failed_mask(failures, C)
        for r, s in zip(chunk, pos):
            pred = q_eval @ A[s] + means[s]
            residuals = pred - target[:, None]
            residuals[:, bad] = np.nan
            train_mse = np.where(bad, np.nan, rss[s] / n)
            out.append(Outcome(r.index, r.replicate, r.test, residuals, train_mse, dict(failures)))
        return out
    design = ref.design
    for r in chunk:
        X_b, y_b = problem.training_set(r)[:2]
        n_b = y_b.size
        mean = float(np.mean(y_b))
        yc = y_b - mean
        distinct = int(np.unique(X_b, axis=0).shape[0])
        fits = ref.n_cols[ref.n_cols <= min(distinct, P)]
        pv = int(fits.max()) if fits.size else 0
        q_b = design.transform(X_b)[:, :P] @ ref.R0inv
        Tinv, w, pv = from_rows(q_b, yc, pv)
        A = nested_coefficients(Tinv[None], w[None], ref.n_cols)[0]
        resid_top = yc - q_b @ (Tinv @ w)
        rss = float(resid_top @ resid_top) + tail_sums(w[None])[0, np.minimum(ref.n_cols, P)]
        failures = _fail_capacities(problem, ref, distinct, pv, lambda X_b=X_b: X_b)
        bad = failed_mask(failures, C)
        residuals = q_eval @ A + mean - target[:, None]
        residuals[:, bad] = np.nan
        out.append(
            Outcome(
                r.index, r.replicate, r.test, residuals, np.where(bad, np.nan, rss / n_b), failures
            )
        )
    return out


def _row_ids(X: NDArray[np.float64]) -> NDArray[np.intp]:
    """Label of each row's distinct value (rows equal across all columns share a label)."""
    return row_groups(X)[0]


def _prepare(problem: Problem) -> tuple[Reference, dict[str, Any]]:
    """Reference factorisation and the arrays every chunk shares."""
    design = design_of(problem)
    if design is None:
        raise ValueError(not_served(problem))
    shared: dict[str, Any] = {}
    if not problem.simulated:
        assert problem.X is not None and problem.y is not None
        X, y = problem.X, problem.y
        ref = reference(design.transform(X), design)
        P = ref.pv
        ybar = float(np.mean(y))
        yc = y - ybar
        iu = np.triu_indices(P)
        Q0 = ref.Q0
        n = Q0.shape[0]
        n_products = iu[0].size + P + 1
        shared.update(
            yc=yc,
            ybar=ybar,
            iu=iu,
            QQ=products(Q0, yc, iu) if n_products * n <= _batched.CHUNK_DOUBLES else None,
            row_block=max(1, _batched.CHUNK_DOUBLES // n_products),
            n_products=n_products,
            Q0_target=np.column_stack([Q0, ybar - problem.target]),
        )
        uid = _row_ids(X)
        shared.update(uid=uid, n_unique=int(uid.max()) + 1 if uid.size else 0)
        shared["sample_weight"] = problem.sample_weight
        return ref, shared
    plan = problem.plan
    assert isinstance(plan, Simulation)
    fixed = plan.design is not None
    ref = reference(design.transform(_reference_rows(problem)), design)
    shared["fixed"] = fixed
    shared["q_eval"] = design.transform(problem.X_eval)[:, : ref.pv] @ ref.R0inv
    if plan.design is not None:
        fixed_design = plan.design
        distinct = int(np.unique(fixed_design, axis=0).shape[0])
        fits = ref.n_cols[ref.n_cols <= min(distinct, ref.pv)]
        pv = int(fits.max()) if fits.size else 0
        shared["pv_fixed"] = pv
        shared["fixed_failures"] = _fail_capacities(
            problem, ref, distinct, pv, lambda: fixed_design, where="fixed"
        )
    return ref, shared


def _outcomes_task(
    holder: int | None,
    problem: Problem,
    ref: Reference,
    shared: dict[str, Any],
    chunk: Sequence[Any],
) -> list[Outcome]:
    """A joblib task: the outcome of every resample of the chunk (BLAS single-threaded)."""
    compute = _simulation_chunk if problem.simulated else _data_chunk
    return call_with_single_blas(holder, compute, problem, ref, shared, chunk)


def _tally_task(
    holder: int | None,
    problem: Problem,
    ref: Reference,
    shared: dict[str, Any],
    chunk: Sequence[Any],
) -> Tally:
    """A joblib task: the chunk's outcomes folded into one tally where they are computed."""
    return call_with_single_blas(holder, _tally_of_chunk, problem, ref, shared, chunk)


def _tally_of_chunk(
    problem: Problem, ref: Reference, shared: dict[str, Any], chunk: Sequence[Any]
) -> Tally:
    """The chunk's tally; small data problems go straight from the dense residuals."""
    n_points, C = problem.X_eval.shape[0], ref.n_cols.size
    if problem.simulated:
        return tally(_simulation_chunk(problem, ref, shared, chunk), n_points, C)
    fits = _chunk_fits(problem, ref, shared, chunk)
    if fits.every_row is not None:
        builder = TallyBuilder(n_points, C)
        if _add_dense(builder, problem, ref, chunk, fits):
            return builder.finish()
    return tally(_outcomes(problem, ref, shared, chunk, fits), n_points, C)


def _add_dense(
    builder: TallyBuilder, problem: Problem, ref: Reference, chunk: Sequence[Any], fits: _ChunkFits
) -> bool:
    """Hand the chunk's residuals at every row to ``builder`` without per-resample outcomes."""
    assert fits.every_row is not None
    pos = fits.pos
    if all(r.counts is not None for r in chunk):  # bootstrap: out of bag = never drawn
        scored = fits.counts[pos] == 0
    else:
        scored = np.zeros((len(chunk), fits.counts.shape[1]), dtype=bool)
        for k, r in enumerate(chunk):
            scored[k, r.test] = True
    failures = [_chunk_failures(problem, ref, fits, r, s) for r, s in zip(chunk, pos)]
    train_mse = fits.rss[pos] / fits.counts[pos].sum(axis=1)[:, None]
    C = ref.n_cols.size
    for k, f in enumerate(failures):
        if f:
            train_mse[k, failed_mask(f, C)] = np.nan
    return builder.add_dense(
        fits.every_row[pos],
        scored,
        [r.index for r in chunk],
        [r.replicate for r in chunk],
        train_mse,
        failures,
    )


def run_tallies(
    problem: Problem,
    resamples: Sequence[Any],
    *,
    n_jobs: int | None = None,
    on_done: Any = None,
) -> Iterator[Tally]:
    """Yield one :class:`~complexity.accumulate.Tally` per chunk of resamples, in order.

    Like :func:`run`, but each chunk's outcomes are reduced to their tally in the worker that
    computed them, so only per-point sums travel back and the accumulation runs in parallel.
    The tallies equal those of :func:`run`'s outcomes grouped by :func:`block_size`.

    Examples
    --------
    >>> import numpy as np
    >>> import complexity as cx
    >>> from complexity.engine import Problem
    >>> rng = np.random.default_rng(0)
    >>> X = rng.uniform(0, 1, (30, 1)); y = np.sin(4 * X[:, 0]) + rng.normal(0, 0.1, 30)
    >>> ladder, plan, root = cx.PolynomialLadder(range(0, 4)), cx.Bootstrap(3), np.random.SeedSequence(0)
    >>> problem = Problem(ladder, ladder.build(X), X, y, X, y, plan, root, X)
    >>> [t.index.tolist() for t in run_tallies(problem, plan.resamples(30, root))]
    [[0, 1, 2]]
    """
    yield from _run_chunks(problem, resamples, _tally_task, n_jobs, on_done)


def run(
    problem: Problem,
    resamples: Sequence[Any],
    *,
    n_jobs: int | None = None,
    on_done: Any = None,
) -> Iterator[Outcome]:
    """Yield the outcome of every resample, in order, for a least-squares ladder.

    Every capacity of a chunk of resamples comes from one matrix product (the weighted Gram
    matrices of a basis orthonormal over the data) and small per-resample factorisations; see
    the module notes. Results are identical for any ``n_jobs`` and any joblib backend, and for
    any subset of the resamples (so a resumed sweep equals an uninterrupted one).

    Parameters
    ----------
    problem : complexity.engine.Problem
        A problem this engine :func:`supports`.
    resamples : sequence of complexity.plans.Resample
    n_jobs : int, optional
        Workers for :class:`joblib.Parallel` (chunks of resamples are the tasks).
    on_done : callable, optional
        Called with the number of fits finished after each chunk.

    Yields
    ------
    complexity.engine.Outcome

    Examples
    --------
    >>> import numpy as np
    >>> import complexity as cx
    >>> from complexity.engine import Problem
    >>> rng = np.random.default_rng(0)
    >>> X = rng.uniform(0, 1, (30, 1)); y = np.sin(4 * X[:, 0]) + rng.normal(0, 0.1, 30)
    >>> ladder, plan, root = cx.PolynomialLadder(range(0, 4)), cx.Bootstrap(3), np.random.SeedSequence(0)
    >>> problem = Problem(ladder, ladder.build(X), X, y, X, y, plan, root, X)
    >>> outcomes = list(run(problem, plan.resamples(30, root)))
    >>> len(outcomes), outcomes[0].residuals.shape[1]
    (3, 4)
    """
    for outcomes in _run_chunks(problem, resamples, _outcomes_task, n_jobs, on_done):
        yield from outcomes


def _run_chunks(
    problem: Problem,
    resamples: Sequence[Any],
    task: Callable[..., Any],
    n_jobs: int | None,
    on_done: Callable[[int], None] | None,
) -> Iterator[Any]:
    """``task(holder, problem, ref, shared, chunk)`` for every chunk, in order, through joblib."""
    with single_blas():
        ref, shared = _prepare(problem)
    C = ref.n_cols.size

    def size(value: Any) -> int:  # a list of outcomes or a tally
        return (len(value) if isinstance(value, list) else int(value.n_resamples)) * C

    # BLAS single-threaded for the whole run (a process-wide setting), held here; tasks in
    # threads of this process see its id and do not set and restore it again
    with single_blas():
        yield from map_chunks(
            task,
            (os.getpid(), problem, ref, shared),
            group_by_index(resamples, ref.chunk),
            n_jobs=n_jobs,
            size=size,
            on_done=on_done,
            # threads by default: numpy releases the GIL in the heavy steps and the shared
            # arrays (the basis, its products) are not copied for each task; a backend set
            # with joblib.parallel_config (processes, dask) takes precedence
            prefer="threads",
        )
