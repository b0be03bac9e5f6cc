"""The ridge engine: every penalty of a ridge ladder from one decomposition per resample.

A module satisfying :class:`complexity._contract.Engine` (``run``, ``run_tallies``,
``block_size``, ``fit_full``) for ladders whose models are scikit-learn ``Ridge(alpha)`` with
an intercept, alone or behind one ``StandardScaler`` (:mod:`complexity.engine._ridge_problem`
decides). For each training set, with multiplicities ``c_i`` (a bootstrap draws rows more than
once), the columns and y are centred on the training rows as ``Ridge(fit_intercept=True)``
does, optionally divided by their standard deviation as the scaler does, and one thin SVD
``diag(sqrt(c)) X_c = U S V^T`` gives every penalty at once (Hoerl & Kennard 1970; Hastie,
Tibshirani & Friedman, *Elements of Statistical Learning*, 2nd ed., eq. 3.47):

    beta(alpha) = V diag(s / (s^2 + alpha)) U^T diag(sqrt(c)) y_c,
    intercept(alpha) = ybar - xbar^T beta(alpha).

The fit on all the data also yields the hat-matrix diagonal of every penalty,
``h_ii(alpha) = 1/n + sum_k U_ik^2 s_k^2 / (s_k^2 + alpha)``, hence leave-one-out (PRESS, exact
for any quadratic penalty: Allen 1974) and generalised cross-validation with the effective
number of parameters ``1 + sum_k s_k^2 / (s_k^2 + alpha)`` (Craven & Wahba 1979; Golub, Heath
& Wahba 1979). Chunks of resamples go to joblib through :mod:`complexity.engine._dispatch`
with BLAS single-threaded, so results do not depend on ``n_jobs``.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from .._contract import FullFit, Outcome, Problem
from ..accumulate import Tally, tallies
from ..criteria import gcv, loocv, loocv_defined
from ..plans import Resample
from ._dispatch import call_with_single_blas, chunk_length, map_chunks, single_blas, slices
from ._ridge_problem import RidgeSpec, ridge_spec
from .generic import block_size  # resamples per block: a function of the problem's size only

__all__ = ["block_size", "fit_full", "run", "run_tallies", "supports"]

_NOT_FINITE = "FloatingPointError: the fitted model returned NaN or infinite predictions"


def supports(problem: Problem) -> bool:
    """True when the ridge engine can serve ``problem`` (a ridge ladder without weights).

    Examples
    --------
    >>> import numpy as np
    >>> import complexity as cx
    >>> from sklearn.linear_model import Ridge
    >>> from complexity._contract import Problem
    >>> X = np.linspace(0, 1, 20)[:, None]
    >>> def posed(ladder, w=None):
    ...     return Problem(ladder, ladder.build(X), X, X[:, 0], X, X[:, 0], cx.Bootstrap(5),
    ...                    np.random.SeedSequence(0), X, sample_weight=w)
    >>> supports(posed(cx.ParamLadder(Ridge(), "alpha", [0.1, 1.0])))
    True
    >>> supports(posed(cx.ParamLadder(Ridge(), "alpha", [0.1, 1.0]), np.ones(20)))
    False
    """
    return ridge_spec(problem) is not None


def _not_served(problem: Problem) -> str:
    return (
        f"the ridge engine cannot serve {problem.ladder!r}: it needs every model to be "
        "Ridge(alpha > 0, fit_intercept=True, positive=False), alone or after one StandardScaler, "
        "and no sample weights."
    )


def _spec(problem: Problem) -> RidgeSpec:
    spec = ridge_spec(problem)
    if spec is None:
        raise ValueError(_not_served(problem))
    return spec


# ----------------------------------------------------------------------- one training set


@dataclass
class _Fit:
    """Every penalty fitted on one training set (in the centred, possibly scaled, columns)."""

    xbar: NDArray[np.float64]  # (p,) training column means
    scale: NDArray[np.float64]  # (p,) divisor of each centred column (ones without a scaler)
    ybar: float
    U: NDArray[np.float64]  # (rows, k) left singular vectors of diag(sqrt(c)) X_c
    s: NDArray[np.float64]  # (k,) singular values
    B: NDArray[np.float64]  # (p, C) coefficients of every penalty on the scaled columns

    def predict(self, X: NDArray[np.float64]) -> NDArray[np.float64]:
        """Predictions of every penalty at the rows of ``X``: shape (rows, C)."""
        out: NDArray[np.float64] = ((X - self.xbar) / self.scale) @ self.B + self.ybar
        return out


def _column_scale(
    Xc: NDArray[np.float64], w: NDArray[np.float64], xbar: NDArray[np.float64], total: float
) -> NDArray[np.float64]:
    """The standard deviation of each column on the training rows, 1 for constant ones.

    A column counts as constant when its variance is below what rounding of its mean can
    produce, as ``StandardScaler`` decides (scikit-learn's ``_is_constant_feature``).
    """
    var = (w @ (Xc * Xc)) / total
    eps = np.finfo(np.float64).eps
    constant = var <= total * eps * var + (total * np.abs(xbar) * eps) ** 2
    out: NDArray[np.float64] = np.where(constant, 1.0, np.sqrt(var))
    return out


def _fit(
    X: NDArray[np.float64],
    y: NDArray[np.float64],
    w: NDArray[np.float64] | None,
    spec: RidgeSpec,
) -> _Fit:
    """Fit every penalty on rows ``X, y`` taken ``w`` times each (None: once each)."""
    weights = np.ones(X.shape[0]) if w is None else np.asarray(w, dtype=np.float64)
    total = float(weights.sum())
    xbar = (weights @ X) / total
    ybar = float(weights @ y) / total
    Xc = X - xbar
    scale = _column_scale(Xc, weights, xbar, total) if spec.scale else np.ones(X.shape[1])
    if spec.scale:
        Xc = Xc / scale
    root = np.sqrt(weights)
    U, s, Vt = np.linalg.svd(root[:, None] * Xc, full_matrices=False)
    z = U.T @ (root * (y - ybar))  # (k,)
    shrink = s[:, None] / (s[:, None] ** 2 + spec.alphas[None, :])  # (k, C)
    B = Vt.T @ (shrink * z[:, None])  # (p, C)
    return _Fit(xbar, scale, ybar, U, s, B)


def _rows_of(problem: Problem, r: Resample) -> tuple[NDArray, NDArray, NDArray | None]:
    """The distinct training rows of ``r`` with their multiplicities (data plans), or the draw."""
    if problem.simulated:
        X, y, _ = problem.training_set(r)
        return np.asarray(X, dtype=np.float64).reshape(len(y), -1), np.asarray(y), None
    assert problem.X is not None and problem.y is not None and r.train is not None
    n = problem.X.shape[0]
    counts = r.counts if r.counts is not None else np.bincount(r.train, minlength=n)
    rows = np.flatnonzero(counts)
    return problem.X[rows], problem.y[rows], np.asarray(counts[rows], dtype=np.float64)


def _outcome(problem: Problem, spec: RidgeSpec, r: Resample) -> Outcome:
    """What resample ``r`` contributes: residuals at its evaluation points, training errors."""
    X, y, w = _rows_of(problem, r)
    fit = _fit(X, y, w, spec)
    C = spec.alphas.size
    train_resid = fit.predict(X) - y[:, None]
    sq = train_resid * train_resid
    total = float(X.shape[0] if w is None else w.sum())
    train_mse = (sq.sum(axis=0) if w is None else w @ sq) / total
    X_eval = problem.X_eval.reshape(problem.X_eval.shape[0], -1)[r.test]
    residuals = fit.predict(X_eval) - problem.target[r.test][:, None]
    failures: dict[int, str] = {}
    bad = ~(np.all(np.isfinite(residuals), axis=0) & np.all(np.isfinite(train_resid), axis=0))
    for c in np.flatnonzero(bad):
        failures[int(c)] = _NOT_FINITE
    if failures:
        residuals[:, bad] = np.nan
        train_mse[bad] = np.nan
    assert residuals.shape == (r.test.size, C)
    return Outcome(r.index, r.replicate, r.test, residuals, train_mse, failures)


def _chunk(problem: Problem, spec: RidgeSpec, chunk: Sequence[Resample]) -> list[Outcome]:
    return [_outcome(problem, spec, r) for r in chunk]


def _task(
    holder: int | None, problem: Problem, spec: RidgeSpec, chunk: Sequence[Resample]
) -> list[Outcome]:
    """A joblib task: the outcome of every resample of the chunk (BLAS single-threaded)."""
    result: list[Outcome] = call_with_single_blas(holder, _chunk, problem, spec, chunk)
    return result


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
    >>> from sklearn.linear_model import Ridge
    >>> from complexity._contract import Problem
    >>> rng = np.random.default_rng(0)
    >>> X = rng.normal(size=(30, 3)); y = X @ [1.0, -2.0, 0.5] + rng.normal(size=30)
    >>> ladder = cx.ParamLadder(Ridge(), "alpha", [0.1, 1.0, 10.0])
    >>> plan, root = cx.CrossValidation(3), np.random.SeedSequence(0)
    >>> problem = Problem(ladder, ladder.build(X), X, y, X, y, plan, root, X)
    >>> outcomes = list(run(problem, plan.resamples(30, root)))
    >>> len(outcomes), outcomes[0].residuals.shape[1]
    (3, 3)
    """
    spec = _spec(problem)
    C = spec.alphas.size
    # BLAS single-threaded for the whole run, held here (see _dispatch): every sum is then
    # done in one fixed order, whatever the number of workers
    with single_blas():
        for outcomes in map_chunks(
            _task,
            (os.getpid(), problem, spec),
            slices(resamples, chunk_length(len(resamples), n_jobs)),
            n_jobs=n_jobs,
            size=lambda outcomes: len(outcomes) * C,
            on_done=on_done,
            prefer="threads",  # numpy releases the GIL in the SVD and the products
        ):
            yield from outcomes


def run_tallies(
    problem: Problem,
    resamples: Sequence[Resample],
    *,
    n_jobs: int | None = None,
    on_done: Callable[[int], None] | None = None,
) -> Iterator[Tally]:
    """Yield the :class:`~complexity.accumulate.Tally` of every block of resamples, in order.

    The outcomes of :func:`run`, tallied by :func:`block_size` blocks as they arrive (so equal
    bit for bit to tallying ``run``'s outcomes the same way).
    """
    n_points, C = problem.X_eval.shape[0], problem.n_capacities
    outcomes = run(problem, resamples, n_jobs=n_jobs, on_done=on_done)
    yield from tallies(outcomes, block_size(problem), n_points, C)


# ------------------------------------------------------------------------ all the data


def _leverage(fit: _Fit, alphas: NDArray[np.float64], n: int) -> NDArray[np.float64]:
    """``h_ii(alpha) = 1/n + sum_k U_ik^2 s_k^2 / (s_k^2 + alpha)``: shape (C, n)."""
    s2 = fit.s**2
    share = s2[:, None] / (s2[:, None] + alphas[None, :])  # (k, C)
    out: NDArray[np.float64] = (fit.U**2 @ share).T + 1.0 / n
    return out


def _effective_parameters(fit: _Fit, alphas: NDArray[np.float64]) -> NDArray[np.float64]:
    """Trace of the hat matrix per penalty: ``1 + sum_k s_k^2 / (s_k^2 + alpha)``."""
    s2 = fit.s**2
    out: NDArray[np.float64] = 1.0 + np.sum(s2[:, None] / (s2[:, None] + alphas[None, :]), axis=0)
    return out


def fit_full(problem: Problem) -> FullFit:
    """Every penalty fitted once on all the data, with leverages and closed-form criteria.

    ``criteria`` holds ``loocv`` (PRESS / n with the ridge hat matrix, exact leave-one-out),
    ``loocv_defined`` and ``gcv`` (with the effective number of parameters) per penalty.

    Examples
    --------
    >>> import numpy as np
    >>> import complexity as cx
    >>> from sklearn.linear_model import Ridge
    >>> from complexity._contract import Problem
    >>> rng = np.random.default_rng(0)
    >>> X = rng.normal(size=(30, 3)); y = X @ [1.0, -2.0, 0.5] + rng.normal(size=30)
    >>> ladder = cx.ParamLadder(Ridge(), "alpha", [0.1, 1.0, 10.0])
    >>> problem = Problem(ladder, ladder.build(X), X, y, X, y, cx.Bootstrap(5),
    ...                   np.random.SeedSequence(0), X)
    >>> full = fit_full(problem)
    >>> full.fitted.shape, full.leverage.shape, list(full.criteria.columns)
    ((30, 3), (3, 30), ['loocv', 'loocv_defined', 'gcv'])
    """
    spec = _spec(problem)
    assert problem.X is not None and problem.y is not None
    X, y = problem.X, problem.y
    n = X.shape[0]
    with single_blas():
        fit = _fit(X, y, None, spec)
        fitted = fit.predict(X)
    resid = y[:, None] - fitted  # (n, C)
    rss = np.sum(resid * resid, axis=0)
    train_mse = rss / n
    failures: dict[int, str] = {}
    bad = ~np.all(np.isfinite(fitted), axis=0)
    for c in np.flatnonzero(bad):
        failures[int(c)] = _NOT_FINITE
    h = np.clip(_leverage(fit, spec.alphas, n), 0.0, 1.0)
    criteria = None
    if not failures:
        criteria = pd.DataFrame(
            {
                "loocv": loocv(resid.T, h),
                "loocv_defined": loocv_defined(h),
                "gcv": gcv(rss, np.minimum(_effective_parameters(fit, spec.alphas), n), n),
            }
        )
    else:
        fitted[:, bad] = np.nan
        train_mse[bad] = np.nan
        h[bad] = np.nan
    return FullFit(fitted, train_mse, failures, criteria=criteria, leverage=h)
