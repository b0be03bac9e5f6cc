"""Streaming accumulators: per evaluation point and capacity, running count, mean and spread.

Resamples are folded in blocks of consecutive indices. A block is first reduced to a
:class:`Tally` (its own per-point count, mean and sum of squared deviations, and its
per-resample error sums) by :func:`tallies`; the tally is then merged into the running
:class:`PointAccumulator` with the pairwise formula of Chan, Golub & LeVeque (1983). A tally is
computed where the outcomes are (an engine may build it in its worker and send only the tally
back), and merging is cheap, so the accumulation runs in parallel with the fitting.

Inside a block, small problems use dense passes over a (resamples, points, capacities) buffer
(two-pass mean and deviations, at most 512 KB at a time); larger ones fold outcome by outcome
with Welford's update. Memory is O(points x capacities + resamples x capacities) however many
resamples a sweep runs. The values accumulated are residuals ``prediction - target``; working
with residuals instead of raw predictions keeps the sums well scaled when y is large and nearly
constant.

Block boundaries are a pure function of the resample index and the problem size, never of how
the work was spread over processes or read back from a checkpoint, and a tally is a pure function
of its block's outcomes, so the accumulated numbers are identical for any ``n_jobs``, for a
resumed sweep, and whether the tally was made in a worker or in the main process.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Iterable, Iterator, Sequence
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from ._contract import Outcome

__all__ = [
    "PointAccumulator",
    "Tally",
    "TallyBuilder",
    "block_size",
    "guard_block",
    "guard_overflow",
    "overflow_limit",
    "tallies",
    "tally",
]

# Dense passes over a (resamples, points, capacities) buffer beat per-resample gathers and
# scatters while the buffer stays cache-sized (512 KB; measured with benchmarks/bench_exact.py):
# a tally uses them when one resample's residuals fit 16,384 doubles, in slices of this size.
_BLOCK_DOUBLES = 65_536
_DENSE_PER_RESAMPLE = 16_384
_MAX_BLOCK = 256  # more resamples per block saves nothing measurable
_SAFE_SUM = float(np.finfo(np.float64).max) * 1e-3  # error sums below this cannot overflow
_STREAM_BLOCK = 32  # resamples per block when folding outcome by outcome (merges amortised)


def block_size(n_points: int, n_capacities: int) -> int:
    """Resamples per accumulation block: block j holds resamples ``[j * K, (j + 1) * K)``.

    A pure function of the problem size, so the blocks (and every sum formed over them) are the
    same however the resamples were computed. (The exact engine uses its own chunks as blocks.)

    Examples
    --------
    >>> block_size(20_000, 16), block_size(40, 11)
    (32, 148)
    """
    per_resample = max(int(n_points) * int(n_capacities), 1)
    if per_resample > _DENSE_PER_RESAMPLE:
        return _STREAM_BLOCK
    return max(1, min(_MAX_BLOCK, _BLOCK_DOUBLES // per_resample))


# ------------------------------------------------------------------------ the overflow guard


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


# ------------------------------------------------------------------------------ block tallies


@dataclass
class Tally:
    """What a block of consecutive resamples contributes to the accumulators.

    Attributes
    ----------
    count : ndarray of float, shape (n_points,) or (n_points, n_capacities)
        How many of the block's resamples scored each point (per capacity once a fit failed).
    mean, m2 : ndarray of shape (n_points, n_capacities)
        The block's mean residual per point and sum of squared deviations from it (0 where the
        count is 0).
    index, replicate : ndarray of int, shape (K,)
        The block's resamples.
    loss, loss2 : ndarray of shape (K, n_capacities)
        Per resample: sum of squared residuals, and of their squares.
    n_ok : ndarray of int, shape (K, n_capacities)
        Per resample: points scored by each successful fit.
    train_mse : ndarray of shape (K, n_capacities)
        Each fit's error on its own training set (NaN where it failed).
    failures : list of (int, dict)
        ``(resample index, {capacity position: message})`` for the resamples with failed fits.
    """

    count: NDArray[np.float64]
    mean: NDArray[np.float64]
    m2: NDArray[np.float64]
    index: NDArray[np.intp]
    replicate: NDArray[np.intp]
    loss: NDArray[np.float64]
    loss2: NDArray[np.float64]
    n_ok: NDArray[np.int64]
    train_mse: NDArray[np.float64]
    failures: list[tuple[int, dict[int, str]]] = field(default_factory=list)

    @property
    def n_resamples(self) -> int:
        """Number of resamples in the block."""
        return int(self.index.size)


def _as_records(a: NDArray[np.float64]) -> NDArray[np.void]:
    """A C-contiguous (rows, k) float array seen as a 1-D array of k-double records."""
    return a.view(np.dtype((np.void, a.itemsize * a.shape[1]))).reshape(a.shape[0])


def _merge_moments(
    count: NDArray[np.float64],
    mean: NDArray[np.float64],
    m2: NDArray[np.float64],
    cnt: NDArray[np.float64],
    b_mean: NDArray[np.float64],
    b_m2: NDArray[np.float64],
) -> NDArray[np.float64]:
    """Chan et al.'s merge of ``(cnt, b_mean, b_m2)`` into ``(count, mean, m2)`` in place.

    ``M2 = M2_a + M2_b + delta^2 n_a n_b / (n_a + n_b)``; counts broadcast over capacities when
    they are per point. Returns the merged count.
    """
    c_a = count if count.ndim == 2 else count[:, None]
    c_b = cnt if cnt.ndim == 2 else cnt[:, None]
    total = c_a + c_b
    share = np.divide(c_b, total, out=np.zeros(total.shape), where=total > 0)
    delta = b_mean - mean
    mean += delta * share
    delta *= delta
    delta *= c_a
    delta *= share
    delta += b_m2
    m2 += delta
    return total if (count.ndim == 2 or cnt.ndim == 2) else total[:, 0].copy()


class TallyBuilder:
    """Folds a block's outcomes, one at a time, into a :class:`Tally`.

    ``on_outcome`` (optional) is called with every outcome after the overflow guard. A block
    may instead be given as dense arrays (:meth:`add_dense`, for engines that have every
    residual of a chunk at hand); both routes give identical tallies for identical residuals.

    Examples
    --------
    >>> import numpy as np
    >>> from complexity.engine import Outcome
    >>> b = TallyBuilder(2, 1)
    >>> b.add(Outcome(0, 0, np.array([1]), np.array([[2.0]]), np.zeros(1)))
    >>> b.finish().mean[:, 0].tolist()
    [0.0, 2.0]
    """

    def __init__(
        self,
        n_points: int,
        n_capacities: int,
        on_outcome: Callable[[Outcome], None] | None = None,
    ) -> None:
        self.n, self.C = n_points, n_capacities
        self.on_outcome = on_outcome
        self.dense = n_points * n_capacities <= _DENSE_PER_RESAMPLE
        self.slice = max(1, _BLOCK_DOUBLES // max(n_points * n_capacities, 1))
        self.count: NDArray[np.float64] = np.zeros(n_points)
        self.mean = np.zeros((n_points, n_capacities))
        self.m2 = np.zeros((n_points, n_capacities))
        self.pending: list[Outcome] = []  # dense mode: outcomes waiting for their slice
        self.index: list[int] = []
        self.replicate: list[int] = []
        self.loss: list[NDArray[np.float64]] = []
        self.loss2: list[NDArray[np.float64]] = []
        self.n_ok: list[NDArray[np.int64]] = []
        self.train: list[NDArray[np.float64]] = []
        self.failures: list[tuple[int, dict[int, str]]] = []

    def add(self, outcome: Outcome) -> None:
        if self.dense:
            self.pending.append(outcome)
            if len(self.pending) == self.slice:
                self._flush()
            return
        if not outcome.failures:
            # the error sums come first; when they are finite with room to spare no residual
            # can trip the overflow guard (max r^4 <= sum r^4), so its own pass is skipped
            with np.errstate(over="ignore", invalid="ignore"):
                sq = outcome.residuals * outcome.residuals
                loss2 = np.einsum("ij,ij->j", sq, sq)
                safe = bool(np.all(loss2 * float(max(self.n, 1)) < _SAFE_SUM))
            if safe:
                self._bookkeeping(outcome)
                self._welford(outcome, np.einsum("ij->j", sq), loss2)
                return
        outcome = guard_overflow(outcome, self.n)
        self._bookkeeping(outcome)
        if outcome.failures:
            self._welford_with_failures(outcome)
        else:
            sq = outcome.residuals * outcome.residuals
            self._welford(outcome, np.einsum("ij->j", sq), np.einsum("ij,ij->j", sq, sq))

    def _bookkeeping(self, outcome: Outcome) -> None:
        if self.on_outcome is not None:
            self.on_outcome(outcome)
        self.index.append(outcome.index)
        self.replicate.append(outcome.replicate)
        self.train.append(outcome.train_mse)
        if outcome.failures:
            self.failures.append((outcome.index, dict(outcome.failures)))

    def _per_capacity(self) -> NDArray[np.float64]:
        if self.count.ndim == 1:
            self.count = np.repeat(self.count[:, None], self.C, axis=1)
        return self.count

    def _welford(
        self, outcome: Outcome, loss: NDArray[np.float64], loss2: NDArray[np.float64]
    ) -> None:
        idx, res = outcome.test, outcome.residuals
        mean = np.take(self.mean, idx, axis=0)
        m2 = np.take(self.m2, idx, axis=0)
        cnt = np.take(self.count, idx, axis=0)
        cnt += 1.0
        self.count[idx] = cnt
        inv = 1.0 / (cnt if cnt.ndim == 2 else cnt[:, None])
        delta = res - mean
        step = delta * inv
        mean += step
        np.subtract(res, mean, out=step)
        step *= delta
        m2 += step
        # rows written back as whole records: about twice as fast as 2-D fancy assignment
        _as_records(self.mean)[idx] = _as_records(mean)
        _as_records(self.m2)[idx] = _as_records(m2)
        self.loss.append(loss)  # column sums by einsum (no slow axis-0 reduction)
        self.loss2.append(loss2)
        self.n_ok.append(np.full(self.C, idx.size, dtype=np.int64))

    def _welford_with_failures(self, outcome: Outcome) -> None:
        idx, res = outcome.test, outcome.residuals
        ok = np.isfinite(res)  # failed capacities are whole NaN columns
        count = self._per_capacity()
        cnt = count[idx] + ok
        old = self.mean[idx]
        delta = np.where(ok, res - old, 0.0)
        new = old + np.divide(delta, cnt, out=np.zeros_like(delta), where=cnt > 0)
        self.m2[idx] += np.where(ok, delta * (res - new), 0.0)
        self.mean[idx] = new
        count[idx] = cnt
        sq = np.where(ok, res, 0.0) ** 2
        self.loss.append(np.einsum("ij->j", sq))
        self.loss2.append(np.einsum("ij,ij->j", sq, sq))
        self.n_ok.append(ok.sum(axis=0).astype(np.int64))

    def _flush(self) -> None:
        """Dense two-pass statistics of the pending outcomes, merged into the block's."""
        outcomes = guard_block(self.pending, self.n)
        self.pending = []
        if not outcomes:
            return
        K, n, C = len(outcomes), self.n, self.C
        buf = np.zeros((K, n, C))
        scored = np.zeros((K, n, 1))
        fitted = np.ones((K, C))
        for k, outcome in enumerate(outcomes):
            self._bookkeeping(outcome)
            buf[k, outcome.test] = outcome.residuals
            scored[k, outcome.test] = 1.0
            if outcome.failures:
                failed = list(outcome.failures)
                fitted[k, failed] = 0.0
                buf[k, :, failed] = 0.0  # failed capacities are NaN columns
        sizes = np.array([o.test.size for o in outcomes], dtype=np.int64)
        self._dense_stats(buf, scored, fitted, sizes)

    def add_dense(
        self,
        residuals: NDArray[np.float64],
        scored: NDArray[np.bool_],
        index: Sequence[int],
        replicate: Sequence[int],
        train_mse: NDArray[np.float64],
        failures: Sequence[dict[int, str]],
    ) -> bool:
        """Fold a whole block given densely; False (nothing done) if it needs the outcome route.

        Parameters
        ----------
        residuals : ndarray of shape (K, n_points, n_capacities)
            Residuals at every point (only the scored ones are used; failed capacities may hold
            anything).
        scored : ndarray of bool, shape (K, n_points)
            Which points each resample scores.
        index, replicate : sequence of int
        train_mse : ndarray of shape (K, n_capacities)
            NaN where the fit failed.
        failures : sequence of dict
            Per resample, failed capacity position -> message.

        Only for a fresh builder in dense mode (small problems). Returns False, leaving the
        builder untouched, when some residual is so large (or NaN) that the overflow guard
        would act: the caller then adds the outcomes one by one.
        """
        K = len(index)
        if not self.dense or self.index or self.pending or K == 0:
            return False
        fitted = np.ones((K, self.C))
        for k, f in enumerate(failures):
            if f:
                fitted[k, list(f)] = 0.0
        with np.errstate(invalid="ignore"):
            big = np.max(np.abs(np.where(scored[:, :, None], residuals, 0.0)), axis=1)
        if not (np.where(fitted > 0, big, 0.0) <= overflow_limit(self.n)).all():
            return False
        sizes = scored.sum(axis=1).astype(np.int64)
        for start in range(0, K, self.slice):
            part = slice(start, start + self.slice)
            # unscored points and failed capacities: exact zeros, as the outcome route leaves them
            keep = scored[part, :, None] & (fitted[part, None, :] > 0)
            buf = np.where(keep, residuals[part], 0.0)
            stop = min(start + self.slice, K)
            self.index += [int(i) for i in index[start:stop]]
            self.replicate += [int(i) for i in replicate[start:stop]]
            self.train += list(train_mse[start:stop])
            self.failures += [
                (int(index[k]), dict(failures[k])) for k in range(start, stop) if failures[k]
            ]
            self._dense_stats(
                buf, scored[part, :, None].astype(np.float64), fitted[part], sizes[part]
            )
        return True

    def _dense_stats(
        self,
        buf: NDArray[np.float64],
        scored: NDArray[np.float64],
        fitted: NDArray[np.float64],
        sizes: NDArray[np.int64],
    ) -> None:
        """Two-pass count, mean and M2 of one dense slice, merged into the block's."""
        n, C = self.n, self.C
        failed_kc = np.argwhere(fitted == 0.0)
        if failed_kc.size:
            self._per_capacity()
            cnt = scored[:, :, 0].T @ fitted  # sums of 0/1: exact
        else:
            cnt = scored.sum(axis=0)[:, 0]
        c2 = cnt if cnt.ndim == 2 else cnt[:, None]
        s_mean = np.divide(buf.sum(axis=0), c2, out=np.zeros((n, C)), where=c2 > 0)
        dev = buf - s_mean
        dev *= scored
        for k, c in failed_kc:
            dev[k, :, c] = 0.0
        s_m2 = np.einsum("knc,knc->nc", dev, dev)
        self.count = _merge_moments(self.count, self.mean, self.m2, cnt, s_mean, s_m2)
        sq = np.multiply(buf, buf, out=dev)
        self.loss += list(sq.sum(axis=1))
        self.loss2 += list(np.einsum("knc,knc->kc", sq, sq))
        self.n_ok += list(sizes[:, None] * fitted.astype(np.int64))

    def finish(self) -> Tally:
        if self.pending:
            self._flush()
        C = self.C

        def rows(values: list, dtype: type) -> np.ndarray:
            return np.array(values, dtype=dtype).reshape(len(values), C)

        return Tally(
            count=self.count,
            mean=self.mean,
            m2=self.m2,
            index=np.array(self.index, dtype=np.intp),
            replicate=np.array(self.replicate, dtype=np.intp),
            loss=rows(self.loss, np.float64),
            loss2=rows(self.loss2, np.float64),
            n_ok=rows(self.n_ok, np.int64),
            train_mse=rows(self.train, np.float64),
            failures=self.failures,
        )


def tally(outcomes: Iterable[Outcome], n_points: int, n_capacities: int) -> Tally:
    """Reduce a block of outcomes to its :class:`Tally` (a pure function of the outcomes).

    The overflow guard (:func:`guard_overflow`) is applied first, so capacities whose residuals
    would overflow the error sums count as failed fits.

    Examples
    --------
    >>> import numpy as np
    >>> from complexity.engine import Outcome
    >>> t = tally([Outcome(0, 0, np.array([0, 1]), np.array([[1.0], [2.0]]), np.zeros(1)),
    ...            Outcome(1, 1, np.array([1, 2]), np.array([[4.0], [5.0]]), np.zeros(1))], 3, 1)
    >>> t.count.tolist(), t.mean[:, 0].tolist(), t.m2[:, 0].tolist(), t.loss[:, 0].tolist()
    ([1.0, 2.0, 1.0], [1.0, 3.0, 5.0], [0.0, 2.0, 0.0], [5.0, 41.0])
    """
    return next(tallies(outcomes, 0, n_points, n_capacities))


def tallies(
    outcomes: Iterable[Outcome],
    size: int,
    n_points: int,
    n_capacities: int,
    on_outcome: Callable[[Outcome], None] | None = None,
) -> Iterator[Tally]:
    """One :class:`Tally` per block ``index // size`` of consecutive outcomes, in order.

    Outcomes are folded in as they arrive (a block's outcomes are never all held at once).
    ``size=0`` puts everything in one block. ``on_outcome`` is called with every outcome after
    the overflow guard (to keep the residuals, say).

    Examples
    --------
    >>> import numpy as np
    >>> from complexity.engine import Outcome
    >>> outs = [Outcome(b, b, np.array([0]), np.array([[float(b)]]), np.zeros(1)) for b in range(5)]
    >>> [t.index.tolist() for t in tallies(outs, 2, 1, 1)]
    [[0, 1], [2, 3], [4]]
    """
    builder, block = TallyBuilder(n_points, n_capacities, on_outcome), None
    for outcome in outcomes:
        key = outcome.index // size if size else 0
        if block is not None and key != block:
            yield builder.finish()
            builder = TallyBuilder(n_points, n_capacities, on_outcome)
        block = key
        builder.add(outcome)
    yield builder.finish()


# ------------------------------------------------------------------------ the running totals


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

    Examples
    --------
    >>> import numpy as np
    >>> from complexity.engine import Outcome
    >>> acc = PointAccumulator(2, 1, 2, 2)
    >>> acc.add(Outcome(0, 0, np.array([0, 1]), np.array([[1.0], [3.0]]), np.zeros(1)))
    >>> acc.add(Outcome(1, 1, np.array([0]), np.array([[2.0]]), np.zeros(1)))
    >>> acc.count[:, 0].tolist(), acc.mean[:, 0].tolist(), acc.m2[:, 0].tolist()
    ([2.0, 1.0], [1.5, 3.0], [0.5, 0.0])
    """

    def __init__(
        self,
        n_points: int,
        n_capacities: int,
        n_resamples: int,
        n_replicates: int,
        keep_predictions: bool = False,
    ) -> None:
        self.mean = np.zeros((n_points, n_capacities))
        self.m2 = np.zeros((n_points, n_capacities))
        # counts (float64: exact for any realistic count, no casts): one per point while every
        # fit succeeded (all capacities then count alike), per point and capacity after a failure
        self._count: NDArray[np.float64] = np.zeros(n_points)
        self._n_points, self._n_capacities = n_points, n_capacities
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
        if self._count.ndim == 2:
            return self._count
        shape = (self._count.size, self._n_capacities)
        return np.broadcast_to(self._count[:, None], shape)

    def merge(self, t: Tally) -> None:
        """Merge a block's :class:`Tally` into the running statistics.

        Examples
        --------
        >>> import numpy as np
        >>> from complexity.engine import Outcome
        >>> acc = PointAccumulator(1, 1, 2, 2)
        >>> acc.merge(tally([Outcome(0, 0, np.array([0]), np.array([[1.0]]), np.zeros(1))], 1, 1))
        >>> acc.merge(tally([Outcome(1, 1, np.array([0]), np.array([[3.0]]), np.zeros(1))], 1, 1))
        >>> float(acc.mean[0, 0]), float(acc.m2[0, 0])
        (2.0, 2.0)
        """
        if self.n_added == 0:  # the first block: merging into zeros would reproduce it exactly
            self._count, self.mean, self.m2 = t.count.copy(), t.mean.copy(), t.m2.copy()
        else:
            if t.count.ndim == 2 and self._count.ndim == 1:
                self._count = np.repeat(self._count[:, None], self._n_capacities, axis=1)
            self._count = _merge_moments(self._count, self.mean, self.m2, t.count, t.mean, t.m2)
        self.resample_loss[t.index] = t.loss
        self.resample_n[t.index] = t.n_ok
        # a replicate may appear twice in a block (K-fold): unbuffered adds
        np.add.at(self.replicate_loss, t.replicate, t.loss)
        np.add.at(self.replicate_loss2, t.replicate, t.loss2)
        np.add.at(self.replicate_n, t.replicate, t.n_ok)
        fit = np.isfinite(t.train_mse)
        self.train_sum += np.where(fit, t.train_mse, 0.0).sum(axis=0)
        self.train_n += fit.sum(axis=0)
        for _, failures in t.failures:
            for c, message in failures.items():
                self.failures.count[c] += 1
                self.failures.first.setdefault(c, message)
        self.n_added += t.n_resamples

    def keep(self, outcome: Outcome) -> None:
        """Store one outcome's residuals (with ``keep_predictions=True``; otherwise nothing)."""
        if self.residuals is not None:
            self.residuals[outcome.index, outcome.test] = outcome.residuals

    def add_block(self, outcomes: Sequence[Outcome]) -> None:
        """Fold a block of consecutive resamples' outcomes in: ``merge(tally(outcomes))``.

        Equal to folding the outcomes one at a time with :meth:`add`, up to rounding. The grouping
        is the caller's: results are reproducible bit for bit when the same outcomes are grouped
        the same way.

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
        outcomes = list(outcomes)
        if outcomes:
            for t in tallies(outcomes, 0, self._n_points, self._n_capacities, self.keep):
                self.merge(t)

    def add(self, outcome: Outcome) -> None:
        """Fold one resample's outcome in (a block of one)."""
        self.add_block([outcome])
