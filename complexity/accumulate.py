"""Streaming accumulators: per evaluation point and capacity, running count, mean and spread.

Outcomes are folded in one at a time (Welford's update, vectorised over points and capacities), or a
block of consecutive resamples at a time (:meth:`PointAccumulator.add_block`: the block's own count,
mean and sum of squared deviations per point, two-pass, merged into the running values with the
pairwise formula of Chan, Golub & LeVeque 1983). Memory is O(points x capacities + resamples x
capacities) however many resamples a sweep runs, plus one block of at most 512 KB. The values
accumulated are residuals ``prediction - target``; working with residuals instead of raw
predictions keeps the sums well scaled when y is large and nearly constant.

Block boundaries are a pure function of the resample index and the problem size
(:func:`block_size`), never of how the work was spread over processes or read back from a
checkpoint, so the accumulated numbers are identical for any ``n_jobs`` and for a resumed sweep.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from .engine import Outcome

__all__ = ["PointAccumulator", "block_size"]

# One block's dense (resamples, points, capacities) buffer stays cache-sized (512 KB): measured
# (benchmarks/bench_exact.py), the dense passes beat per-resample gathers and scatters only while
# the buffer is small, so problems with more than 65,536 residuals per resample use blocks of one
# (plain Welford updates).
_BLOCK_DOUBLES = 65_536
_MAX_BLOCK = 256  # more resamples per block saves nothing measurable


def block_size(n_points: int, n_capacities: int) -> int:
    """Resamples per accumulation block: block j holds resamples ``[j * K, (j + 1) * K)``.

    A pure function of the problem size, so the blocks (and every sum formed over them) are the
    same however the resamples were computed.

    Examples
    --------
    >>> block_size(20_000, 16), block_size(40, 11)
    (1, 148)
    """
    per_resample = max(int(n_points) * int(n_capacities), 1)
    return max(1, min(_MAX_BLOCK, _BLOCK_DOUBLES // per_resample))


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
        # separate contiguous arrays: arithmetic on contiguous gathers is ~3x faster than on
        # the strided halves of one interleaved array (measured), which outweighs a second gather
        self.mean = np.zeros((n_points, n_capacities))
        self.m2 = np.zeros((n_points, n_capacities))
        # counts (float64: exact for any realistic count, no casts): one per point while every
        # fit succeeded (all capacities then count alike), per point and capacity after a failure
        self._point_count: NDArray[np.float64] | None = np.zeros(n_points)
        self._count: NDArray[np.float64] | None = None
        self._n_capacities = n_capacities
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

    @property
    def count(self) -> NDArray[np.float64]:
        """How many resamples scored each point, per capacity (read-only while uniform)."""
        if self._count is not None:
            return self._count
        assert self._point_count is not None
        shape = (self._point_count.size, self._n_capacities)
        return np.broadcast_to(self._point_count[:, None], shape)

    def _counts_per_capacity(self) -> NDArray[np.float64]:
        """Switch to (and return) counts per point and capacity (after a failed fit)."""
        if self._count is None:
            self._count = np.array(self.count)
            self._point_count = None
        return self._count

    def add(self, outcome: Outcome) -> None:
        """Fold one resample's outcome into the running statistics."""
        idx, res = outcome.test, outcome.residuals
        if outcome.failures:
            self._add_with_failures(outcome)
        else:
            # Welford's update; every capacity was fitted, so every point counts once more.
            mean = np.take(self.mean, idx, axis=0)
            m2 = np.take(self.m2, idx, axis=0)
            if self._point_count is not None:
                cnt = np.take(self._point_count, idx)
                cnt += 1.0
                self._point_count[idx] = cnt
                cnt = cnt[:, None]
            else:
                cnt = np.take(self._count, idx, axis=0)
                cnt += 1.0
                self._count[idx] = cnt
            delta = res - mean
            mean += delta / cnt
            m2 += delta * (res - mean)
            self.mean[idx] = mean
            self.m2[idx] = m2
            sq = res * res
            n_ok = np.full(res.shape[1], res.shape[0], dtype=np.int64)
            self._add_sums(outcome, sq, n_ok)

    def add_block(self, outcomes: Sequence[Outcome]) -> None:
        """Fold a block of resamples' outcomes into the running statistics at once.

        The block's per-point count, mean and sum of squared deviations from its own mean are
        computed on a dense (resamples, points, capacities) buffer (two passes: mean first, then
        deviations; a block of one is a plain Welford update, :meth:`add`), then merged with the running values by Chan et al.'s pairwise update
        ``M2 = M2_a + M2_b + delta^2 n_a n_b / (n_a + n_b)``. Equal to folding the outcomes one
        at a time with :meth:`add`, up to rounding. The grouping is the caller's: results are
        reproducible bit for bit when the same outcomes are grouped the same way.

        Parameters
        ----------
        outcomes : sequence of Outcome
            Consecutive resamples (any number; failed capacities are NaN columns listed in
            ``failures``).

        Examples
        --------
        >>> import numpy as np
        >>> from complexity.engine import Outcome
        >>> acc = PointAccumulator(3, 1, 2, 2)
        >>> acc.add_block([Outcome(0, 0, np.array([0, 1]), np.array([[1.0], [2.0]]), np.zeros(1)),
        ...                Outcome(1, 1, np.array([1, 2]), np.array([[4.0], [5.0]]), np.zeros(1))])
        >>> acc.count[:, 0].tolist(), acc.mean[:, 0].tolist(), acc.m2[:, 0].tolist()
        ([1.0, 2.0, 1.0], [1.0, 3.0, 5.0], [0.0, 2.0, 0.0])
        """
        K = len(outcomes)
        if K == 0:
            return
        if K == 1:
            self.add(outcomes[0])
            return
        n, C = self.count.shape
        buf = np.zeros((K, n, C))
        scored = np.zeros((K, n, 1))
        fitted = np.ones((K, C))
        for k, outcome in enumerate(outcomes):
            buf[k, outcome.test] = outcome.residuals
            scored[k, outcome.test] = 1.0
            if outcome.failures:
                failed = list(outcome.failures)
                fitted[k, failed] = 0.0
                buf[k, :, failed] = 0.0  # failed capacities are NaN columns
        failed_kc = np.argwhere(fitted == 0.0)
        # block count per point (and capacity, after failures): sums of 0/1, exact
        before = self._counts_per_capacity() if failed_kc.size else self.count
        cnt = scored[:, :, 0].T @ fitted if failed_kc.size else scored.sum(axis=0)
        block_mean = np.divide(buf.sum(axis=0), cnt, out=np.zeros((n, C)), where=cnt > 0)
        dev = buf - block_mean
        dev *= scored
        for k, c in failed_kc:
            dev[k, :, c] = 0.0
        block_m2 = np.einsum("knc,knc->nc", dev, dev)
        # Chan et al.'s merge of (count, mean, m2) with the block's (cnt, block_mean, block_m2)
        total = before + cnt
        share = np.divide(cnt, total, out=np.zeros(total.shape), where=total > 0)
        delta = block_mean - self.mean
        self.mean += delta * share
        delta *= delta
        delta *= before
        delta *= share
        delta += block_m2
        self.m2 += delta
        if self._point_count is not None:
            self._point_count = total[:, 0].copy()
        else:
            self._count[...] = total

        sq = np.multiply(buf, buf, out=dev)
        loss = sq.sum(axis=1)
        loss2 = np.einsum("knc,knc->kc", sq, sq)
        sizes = np.array([o.test.size for o in outcomes], dtype=np.int64)
        n_ok = sizes[:, None] * fitted.astype(np.int64)
        index = np.array([o.index for o in outcomes], dtype=np.intp)
        replicate = np.array([o.replicate for o in outcomes], dtype=np.intp)
        self.resample_loss[index] = loss
        self.resample_n[index] = n_ok
        # a replicate may appear twice in a block (K-fold): unbuffered adds
        np.add.at(self.replicate_loss, replicate, loss)
        np.add.at(self.replicate_loss2, replicate, loss2)
        np.add.at(self.replicate_n, replicate, n_ok)
        train = np.array([o.train_mse for o in outcomes])
        fit = np.isfinite(train)
        self.train_sum += np.where(fit, train, 0.0).sum(axis=0)
        self.train_n += fit.sum(axis=0)
        for outcome in outcomes:
            for c, message in outcome.failures.items():
                self.failures.count[c] += 1
                self.failures.first.setdefault(c, message)
            if self.residuals is not None:
                self.residuals[outcome.index, outcome.test] = outcome.residuals
        self.n_added += K

    def _add_with_failures(self, outcome: Outcome) -> None:
        idx, res = outcome.test, outcome.residuals
        ok = np.isfinite(res)  # failed capacities are whole NaN columns
        # Welford's update, applied only where the fit succeeded.
        count = self._counts_per_capacity()
        cnt = count[idx] + ok
        old = self.mean[idx]
        delta = np.where(ok, res - old, 0.0)
        new = old + np.divide(delta, cnt, out=np.zeros_like(delta), where=cnt > 0)
        self.m2[idx] += np.where(ok, delta * (res - new), 0.0)
        self.mean[idx] = new
        count[idx] = cnt
        sq = np.where(ok, res, 0.0) ** 2
        self._add_sums(outcome, sq, ok.sum(axis=0))

    def _add_sums(self, outcome: Outcome, sq: NDArray[np.float64], n_ok: NDArray[np.int64]) -> None:
        loss = np.einsum("ij->j", sq)  # column sums (einsum: no slow axis-0 reduction)
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
