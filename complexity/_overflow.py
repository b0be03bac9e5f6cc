"""The overflow guard: residuals so large that the error sums would overflow become failed fits.

Sums of squared residuals, and of their squares (for standard errors), overflow float64 once
``|residual|^4 * n_points`` passes its largest value (about 1.8e308); such a fit is reported as a
failure with its size instead of as an inf curve. Used by :mod:`complexity.accumulate` on every
outcome before it is folded in.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence

import numpy as np

from ._contract import Outcome

__all__ = ["guard_block", "guard_overflow", "overflow_limit"]


def overflow_limit(n_points: int) -> float:
    """Below this ``|residual|`` no error sum can overflow (slightly under the exact bound).

    Examples
    --------
    >>> overflow_limit(1) > 1e76
    True
    """
    return float((np.finfo(np.float64).max / max(n_points, 1)) ** 0.25) * (1.0 - 1e-9)


def guard_overflow(outcome: Outcome, n_points: int, big: np.ndarray | None = None) -> Outcome:
    """Record as failed every capacity whose residuals are too large for the error sums.

    Sums of squared residuals (and of their squares, for standard errors) would overflow to
    infinity; such a fit is reported as a failure with its size instead of as an inf curve.
    ``big`` (the largest ``|residual|`` per capacity, NaN where any is NaN) may be given when
    already known.

    Examples
    --------
    >>> import numpy as np
    >>> from complexity.engine import Outcome
    >>> o = Outcome(0, 0, np.array([0]), np.array([[1.0, 1e300]]), np.zeros(2))
    >>> sorted(guard_overflow(o, 10).failures)
    [1]
    """
    res = outcome.residuals
    limit = overflow_limit(n_points)
    if big is None:
        # one pass over the whole array first (a per-column reduction costs 10x more); NaN
        # propagates (a failed capacity is a NaN column, already recorded as a failure)
        if res.size == 0 or (res.max() <= limit and res.min() >= -limit):
            return outcome
        big = np.maximum(np.max(res, axis=0, initial=0.0), -np.min(res, axis=0, initial=0.0))
    suspect = ~(big <= limit)  # NaN or close to the bound
    if outcome.failures:
        suspect[list(outcome.failures)] = False
    if not suspect.any():
        return outcome
    with np.errstate(over="ignore", invalid="ignore"):
        bad = suspect & ~np.isfinite(big**4 * float(max(n_points, 1)))
    if not bad.any():
        return outcome
    res, train_mse, failures = res.copy(), outcome.train_mse.copy(), dict(outcome.failures)
    for c in np.flatnonzero(bad):
        res[:, c] = np.nan
        train_mse[c] = np.nan
        failures.setdefault(
            int(c),
            "the fit returned NaN predictions"
            if np.isnan(big[c])
            else f"predictions so far from the targets (|prediction - target| up to {big[c]:.3g}) "
            "that error sums overflow float64",
        )
    return dataclasses.replace(outcome, residuals=res, train_mse=train_mse, failures=failures)


def guard_block(outcomes: Sequence[Outcome], n_points: int) -> list[Outcome]:
    """:func:`guard_overflow` for a block of outcomes, with one check for the whole block.

    Examples
    --------
    >>> import numpy as np
    >>> from complexity.engine import Outcome
    >>> outs = [Outcome(b, b, np.array([0]), np.array([[1.0]]), np.zeros(1)) for b in range(2)]
    >>> [o.failures for o in guard_block(outs, 10)]
    [{}, {}]
    """
    outcomes = list(outcomes)
    if len(outcomes) == 1:
        return [guard_overflow(outcomes[0], n_points)]
    sizes = [o.test.size for o in outcomes]
    if not sum(sizes):
        return outcomes
    C = outcomes[0].residuals.shape[1]
    starts = np.cumsum([0, *sizes[:-1]])
    nonempty = np.array(sizes) > 0
    stacked = np.concatenate([o.residuals for o in outcomes])
    top = np.zeros((len(outcomes), C))
    low = np.zeros((len(outcomes), C))
    # np.maximum / np.minimum propagate NaN, as np.max does
    top[nonempty] = np.maximum.reduceat(stacked, starts[nonempty], axis=0)
    low[nonempty] = np.minimum.reduceat(stacked, starts[nonempty], axis=0)
    big = np.maximum(np.maximum(top, 0.0), -low)
    suspect = ~(big <= overflow_limit(n_points))
    if not suspect.any():
        return outcomes
    return [
        guard_overflow(o, n_points, big[k]) if suspect[k].any() else o
        for k, o in enumerate(outcomes)
    ]
