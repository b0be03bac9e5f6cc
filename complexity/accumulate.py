"""Streaming accumulators: per evaluation point and capacity, running count, mean and spread.

Resamples are folded in blocks of consecutive indices. A block is first reduced to a
:class:`Tally` (its own per-point count, mean and sum of squared deviations, and its
per-resample error sums) by :func:`tallies`; the tally is then merged into the running
:class:`PointAccumulator` with the pairwise formula of Chan, Golub & LeVeque (1983). A tally is
computed where the outcomes are (an engine may build it in its worker and send only the tally
back), and merging is cheap, so the accumulation runs in parallel with the fitting.

Inside a block, outcomes are folded in slices: small problems put a slice of resamples into a
dense (resamples, points, capacities) buffer (at most 512 KB) and summarise it in two passes;
larger ones fold each outcome at its own points. Both then combine with the running sums by the
one merge formula of :mod:`complexity._moments` (a single outcome is its case ``n_b = 1``,
Welford's update), so there is one way of folding a block. Memory is O(points x capacities +
resamples x capacities) however many resamples a sweep runs. The values accumulated are
residuals ``prediction - target``; working with residuals instead of raw predictions keeps the
sums well scaled when y is large and nearly constant.

Block boundaries are a pure function of the resample index and the problem size, never of how
the work was spread over processes or read back from a checkpoint, and a tally is a pure function
of its block's outcomes, so the accumulated numbers are identical for any ``n_jobs``, for a
resumed sweep, and whether the tally was made in a worker or in the main process.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Iterator, Sequence
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from ._contract import Outcome
from ._moments import Counts, merge
from ._overflow import guard_block, guard_overflow, overflow_limit

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


# ------------------------------------------------------------------------------ block tallies


@dataclass
class Tally:
    """What a block of consecutive resamples contributes to the accumulators.

    Attributes
    ----------
    counts : complexity._moments.Counts
        How many of the block's resamples scored each point, per capacity (read through
        :attr:`count`).
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

    counts: Counts
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
    def count(self) -> NDArray[np.float64]:
        """Resamples of the block whose fit scored each point: shape (n_points, n_capacities).

        Always that shape and meaning; read-only (a broadcast of one column while every fit of
        the block succeeded).
        """
        return self.counts.view()

    @property
    def n_resamples(self) -> int:
        """Number of resamples in the block."""
        return int(self.index.size)


def _as_records(a: NDArray[np.float64]) -> NDArray[np.void]:
    """A C-contiguous (rows, k) float array seen as a 1-D array of k-double records."""
    return a.view(np.dtype((np.void, a.itemsize * a.shape[1]))).reshape(a.shape[0])


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
        per_resample = n_points * n_capacities
        # dense slices while one resample's residuals stay cache-sized, else outcome by outcome
        self.dense = per_resample <= _DENSE_PER_RESAMPLE
        self.slice = max(1, _BLOCK_DOUBLES // max(per_resample, 1)) if self.dense else 1
        self.counts = Counts(n_points, n_capacities)
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
        sums = None
        if not outcome.failures:
            # the error sums come first; when they are finite with room to spare no residual
            # can trip the overflow guard (max r^4 <= sum r^4), so its own pass is skipped
            sums = _error_sums(outcome.residuals)
            if not np.all(sums[1] * float(max(self.n, 1)) < _SAFE_SUM):
                sums = None
        if sums is None:
            outcome = guard_overflow(outcome, self.n)
        self._bookkeeping(outcome)
        self._fold_rows(outcome, sums)

    def _bookkeeping(self, outcome: Outcome) -> None:
        if self.on_outcome is not None:
            self.on_outcome(outcome)
        self.index.append(outcome.index)
        self.replicate.append(outcome.replicate)
        self.train.append(outcome.train_mse)
        if outcome.failures:
            self.failures.append((outcome.index, dict(outcome.failures)))

    def _fold_rows(
        self, outcome: Outcome, sums: tuple[NDArray[np.float64], NDArray[np.float64]] | None
    ) -> None:
        """Merge one outcome (a count of 1 per scored point) into the block, at its points.

        Plain running sums of r and r^2 would save a few passes (about 20% per outcome at
        n = 20,000, where the gathers and scatters of the per-point rows dominate either way)
        but lose M2 to cancellation when residuals sit far from zero with a small spread
        (tests/test_accumulate.py, adversarial cases), so the merge is used here too.
        """
        idx, res = outcome.test, outcome.residuals
        cnt_b: NDArray[np.float64] | float = 1.0
        n_ok = np.full(self.C, idx.size, dtype=np.int64)
        if outcome.failures:  # failed capacities are whole NaN columns: count 0 there
            ok = np.ones(self.C)
            ok[list(outcome.failures)] = 0.0
            res = np.where(ok > 0, res, 0.0)
            self.counts.widen()
            cnt_b = ok
            n_ok *= ok.astype(np.int64)
        if sums is None:
            sums = _error_sums(res)
        count = np.take(self.counts.values, idx, axis=0)
        mean = np.take(self.mean, idx, axis=0)
        m2 = np.take(self.m2, idx, axis=0)
        merge(count, mean, m2, cnt_b, res)
        # rows written back as whole records: about twice as fast as 2-D fancy assignment
        _as_records(self.counts.values)[idx] = _as_records(count)
        _as_records(self.mean)[idx] = _as_records(mean)
        _as_records(self.m2)[idx] = _as_records(m2)
        self.loss.append(sums[0])
        self.loss2.append(sums[1])
        self.n_ok.append(n_ok)

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
        failed_kc = np.argwhere(fitted == 0.0)
        if failed_kc.size:
            self.counts.widen()
            cnt = scored[:, :, 0].T @ fitted  # sums of 0/1: exact
        else:
            cnt = scored.sum(axis=0)  # (n, 1): every capacity alike
        s_mean = np.divide(buf.sum(axis=0), cnt, out=np.zeros((self.n, self.C)), where=cnt > 0)
        dev = buf - s_mean
        dev *= scored
        for k, c in failed_kc:
            dev[k, :, c] = 0.0
        s_m2 = np.einsum("knc,knc->nc", dev, dev)
        merge(self.counts.values, self.mean, self.m2, cnt, s_mean, s_m2)
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
            counts=self.counts,
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


def _error_sums(res: NDArray[np.float64]) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Per capacity: sum of squared residuals and of their squares (column sums by einsum)."""
    with np.errstate(over="ignore", invalid="ignore"):
        sq = res * res
        return np.einsum("ij->j", sq), np.einsum("ij,ij->j", sq, sq)


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
    >>> t.count[:, 0].tolist(), t.mean[:, 0].tolist(), t.m2[:, 0].tolist(), t.loss[:, 0].tolist()
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
        self._counts = Counts(n_points, n_capacities)
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
        """How many resamples scored each point, per capacity: shape (n_points, n_capacities).

        Read-only (a broadcast of one column while every fit succeeded).
        """
        return self._counts.view()

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
            self._counts, self.mean, self.m2 = t.counts.copy(), t.mean.copy(), t.m2.copy()
        else:
            if not t.counts.uniform:
                self._counts.widen()
            merge(self._counts.values, self.mean, self.m2, t.counts.values, t.mean, t.m2)
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
