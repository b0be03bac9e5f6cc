"""Streaming accumulators: per evaluation point and capacity, running count, mean and spread.

Outcomes are folded in one at a time (Welford's update, vectorised over points and capacities), so
memory is O(points x capacities + resamples x capacities) however many resamples a sweep runs. The
values accumulated are residuals ``prediction - target``; working with residuals instead of raw
predictions keeps the sums well scaled when y is large and nearly constant.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from .engine import Outcome

__all__ = ["PointAccumulator"]


@dataclass
class _Failures:
    count: NDArray[np.int64]
    first: dict[int, str] = field(default_factory=dict)


class PointAccumulator:
    """Running per-point statistics of the residuals of every capacity.

    Parameters
    ----------
    n_points : int
        Number of evaluation points.
    n_capacities : int
    n_resamples : int
    n_replicates : int
    keep_predictions : bool, default=False
        Also keep every residual, in an array of shape (n_resamples, n_points, n_capacities)
        (NaN where a point was not scored by a resample). Only for small problems.

    Attributes
    ----------
    count : ndarray of float (whole numbers), shape (n_points, n_capacities)
        How many resamples scored each point (per capacity; failed fits do not count).
    mean : ndarray of shape (n_points, n_capacities)
        Mean residual per point.
    m2 : ndarray of shape (n_points, n_capacities)
        Sum of squared deviations of the residuals from their mean, per point.
    resample_loss, resample_n : ndarray of shape (n_resamples, n_capacities)
        Sum of squared residuals, and number of points, per resample.
    replicate_loss, replicate_loss2, replicate_n : ndarray of shape (n_replicates, n_capacities)
        Sum of squared residuals, of their squares, and number of points, per replicate.
    train_sum, train_n : ndarray of shape (n_capacities,)
        Sum and count of the resamples' own training errors.
    """

    def __init__(
        self,
        n_points: int,
        n_capacities: int,
        n_resamples: int,
        n_replicates: int,
        keep_predictions: bool = False,
    ) -> None:
        shape = (n_points, n_capacities)
        self.count = np.zeros(shape)  # float64: exact for any realistic count, no casts
        self.mean = np.zeros(shape)
        self.m2 = np.zeros(shape)
        self.resample_loss = np.zeros((n_resamples, n_capacities))
        self.resample_n = np.zeros((n_resamples, n_capacities), dtype=np.int64)
        self.replicate_loss = np.zeros((n_replicates, n_capacities))
        self.replicate_loss2 = np.zeros((n_replicates, n_capacities))
        self.replicate_n = np.zeros((n_replicates, n_capacities), dtype=np.int64)
        self.train_sum = np.zeros(n_capacities)
        self.train_n = np.zeros(n_capacities, dtype=np.int64)
        self.failures = _Failures(np.zeros(n_capacities, dtype=np.int64))
        self.residuals: NDArray[np.float64] | None = (
            np.full((n_resamples, n_points, n_capacities), np.nan) if keep_predictions else None
        )
        self.n_added = 0

    def add(self, outcome: Outcome) -> None:
        """Fold one resample's outcome into the running statistics."""
        idx, res = outcome.test, outcome.residuals
        if outcome.failures:
            self._add_with_failures(outcome)
        else:
            # Welford's update; every capacity was fitted, so every point counts once more.
            cnt = np.take(self.count, idx, axis=0)
            cnt += 1.0
            old = np.take(self.mean, idx, axis=0)
            delta = res - old
            new = delta / cnt
            new += old
            m2 = np.take(self.m2, idx, axis=0)
            m2 += delta * (res - new)
            self.mean[idx] = new
            self.m2[idx] = m2
            self.count[idx] = cnt
            sq = res * res
            n_ok = np.full(res.shape[1], res.shape[0], dtype=np.int64)
            self._add_sums(outcome, sq, n_ok)

    def _add_with_failures(self, outcome: Outcome) -> None:
        idx, res = outcome.test, outcome.residuals
        ok = np.isfinite(res)  # failed capacities are whole NaN columns
        # Welford's update, applied only where the fit succeeded.
        cnt = self.count[idx] + ok
        old = self.mean[idx]
        delta = np.where(ok, res - old, 0.0)
        new = old + np.divide(delta, cnt, out=np.zeros_like(delta), where=cnt > 0)
        self.m2[idx] += np.where(ok, delta * (res - new), 0.0)
        self.mean[idx] = new
        self.count[idx] = cnt
        sq = np.where(ok, res, 0.0) ** 2
        self._add_sums(outcome, sq, ok.sum(axis=0))

    def _add_sums(self, outcome: Outcome, sq: NDArray[np.float64], n_ok: NDArray[np.int64]) -> None:
        loss = sq.sum(axis=0)
        self.resample_loss[outcome.index] = loss
        self.resample_n[outcome.index] = n_ok
        self.replicate_loss[outcome.replicate] += loss
        self.replicate_loss2[outcome.replicate] += np.einsum("ij,ij->j", sq, sq)
        self.replicate_n[outcome.replicate] += n_ok

        fit = np.isfinite(outcome.train_mse)
        self.train_sum[fit] += outcome.train_mse[fit]
        self.train_n[fit] += 1
        for c, message in outcome.failures.items():
            self.failures.count[c] += 1
            self.failures.first.setdefault(c, message)
        if self.residuals is not None:
            self.residuals[outcome.index, outcome.test] = outcome.residuals
        self.n_added += 1
