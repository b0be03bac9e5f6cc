"""Tests for complexity.accumulate: the streaming sums equal the direct computation."""

import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from complexity.accumulate import PointAccumulator, block_size
from complexity.engine import Outcome


@settings(max_examples=40, deadline=None)
@given(st.integers(2, 25), st.integers(1, 4), st.integers(0, 10_000), st.floats(-1e6, 1e6))
def test_streaming_equals_direct(B, C, seed, offset):
    # law (common practice, Welford's online algorithm): running mean/variance equal the batch
    # values computed from all residuals at once, whatever the order of arrival.
    rng = np.random.default_rng(seed)
    n = 7
    res = offset + rng.normal(size=(B, n, C))
    keep = rng.random((B, n)) < 0.6
    acc = PointAccumulator(n, C, B, B, keep_predictions=True)
    for b in range(B):
        test = np.flatnonzero(keep[b])
        acc.add(Outcome(b, b, test, res[b, test], np.zeros(C)))
    for i in range(n):
        vals = res[keep[:, i], i, :]
        assert acc.count[i, 0] == vals.shape[0]
        if vals.shape[0]:
            np.testing.assert_allclose(acc.mean[i], vals.mean(axis=0), rtol=1e-9, atol=1e-9)
            np.testing.assert_allclose(
                acc.m2[i], ((vals - vals.mean(axis=0)) ** 2).sum(axis=0), rtol=1e-7, atol=1e-6
            )
    stored = acc.residuals
    np.testing.assert_array_equal(np.isfinite(stored[..., 0]), keep)


def test_failed_capacity_is_not_counted():
    acc = PointAccumulator(3, 2, 1, 1)
    res = np.array([[0.5, np.nan], [1.0, np.nan], [-0.5, np.nan]])
    acc.add(Outcome(0, 0, np.arange(3), res, np.array([0.1, np.nan]), {1: "ValueError: boom"}))
    assert acc.count[:, 0].tolist() == [1, 1, 1]
    assert acc.count[:, 1].tolist() == [0, 0, 0]
    assert acc.failures.count.tolist() == [0, 1]
    assert acc.failures.first == {1: "ValueError: boom"}
    assert acc.train_n.tolist() == [1, 0]
    assert acc.resample_loss[0, 0] == pytest.approx(1.5)


def test_memory_does_not_grow_with_resamples():
    # design decision (DESIGN.md "Memory"): per-point state is O(points x capacities)
    small = PointAccumulator(1000, 5, 10, 10)
    big = PointAccumulator(1000, 5, 10_000, 10_000)
    assert small.mean.nbytes == big.mean.nbytes
    assert big.residuals is None


def _outcomes(B, n, C, seed, offset, density, fail_rate):
    """Random outcomes: each resample scores a random subset; some capacities fail (NaN columns)."""
    rng = np.random.default_rng(seed)
    out = []
    for b in range(B):
        test = np.flatnonzero(rng.random(n) < density)
        res = offset + rng.normal(size=(test.size, C)) * rng.uniform(1e-3, 1.0, C)
        failures = {int(c): f"failed {c}" for c in np.flatnonzero(rng.random(C) < fail_rate)}
        res[:, list(failures)] = np.nan
        train = rng.uniform(0.0, 1.0, C)
        train[list(failures)] = np.nan
        out.append(Outcome(b, b // 2, test, res, train, failures))
    return out


def _close(a, b, rtol, atol=0.0):
    scale = np.maximum(np.abs(a), np.abs(b))
    np.testing.assert_array_less(np.abs(a - b), rtol * scale + atol + 1e-300)


@settings(max_examples=40, deadline=None)
@given(
    st.integers(1, 30),
    st.integers(1, 9),
    st.integers(1, 4),
    st.integers(0, 10_000),
    st.floats(-1e3, 1e3),
    st.sampled_from([0.0, 0.37, 0.9, 1.0]),
    st.sampled_from([0.0, 0.2]),
    st.integers(1, 12),
)
def test_block_merge_equals_welford(B, n, C, seed, offset, density, fail_rate, K):
    # law (Chan, Golub & LeVeque 1983, pairwise update of count/mean/M2): folding blocks of
    # resamples and merging them equals folding the resamples one at a time (Welford), up to
    # rounding; counts, per-resample and per-replicate sums and failures agree too.
    outcomes = _outcomes(B, n, C, seed, offset, density, fail_rate)
    one = PointAccumulator(n, C, B, (B + 1) // 2, keep_predictions=True)
    for o in outcomes:
        one.add(o)
    blk = PointAccumulator(n, C, B, (B + 1) // 2, keep_predictions=True)
    for start in range(0, B, K):
        blk.add_block(outcomes[start : start + K])
    np.testing.assert_array_equal(blk.count, one.count)
    # 1e-12 relative; a mean that cancels to about zero is compared on the residuals' scale
    _close(blk.mean, one.mean, 1e-12, atol=1e-12 * (1 + abs(offset)))
    # M2 of residuals far from zero (offset) with a small spread carries the rounding of the
    # offset: both orders lose the same digits, (offset / spread)^2 * eps at most
    _close(blk.m2, one.m2, 1e-12 * (1 + abs(offset)) ** 2)
    for name in ("resample_loss", "replicate_loss", "replicate_loss2", "train_sum"):
        _close(getattr(blk, name), getattr(one, name), 1e-12)
    for name in ("resample_n", "replicate_n", "train_n"):
        np.testing.assert_array_equal(getattr(blk, name), getattr(one, name))
    np.testing.assert_array_equal(blk.failures.count, one.failures.count)
    assert blk.failures.first == one.failures.first
    np.testing.assert_array_equal(blk.residuals, one.residuals)
    assert blk.n_added == one.n_added == B


def test_block_merge_m2_of_a_constant_point_offset_far_from_zero():
    # Chan et al.'s merge keeps M2 accurate where a naive sum of squares cancels: residuals
    # 1e8 + {0, 1, 2, 3} (mean 1e8 + 1.5, M2 = 5 exactly) split over two blocks.
    vals = 1e8 + np.arange(4.0)
    outs = [Outcome(b, b, np.array([0]), np.array([[v]]), np.zeros(1)) for b, v in enumerate(vals)]
    acc = PointAccumulator(1, 1, 4, 4)
    acc.add_block(outs[:2])
    acc.add_block(outs[2:])
    assert acc.mean[0, 0] == 1e8 + 1.5
    assert acc.m2[0, 0] == 5.0


def test_block_size_is_a_function_of_the_problem_size_only():
    # design decision (DESIGN.md "Determinism"): block boundaries never depend on n_jobs
    assert block_size(40, 11) == block_size(40, 11) >= 2
    assert block_size(20_000, 16) == 32  # large: folded outcome by outcome, merged per block
    assert all(block_size(n, 5) >= block_size(n * 2, 5) for n in (1, 10, 1000))
    assert block_size(1, 1) <= 256


@pytest.mark.parametrize("n", [50, 20_000], ids=["dense", "streamed"])
def test_residuals_too_large_for_the_sums_become_failures_on_both_tally_routes(n):
    # the guard's definition (complexity.accumulate.guard_overflow): a capacity whose
    # |residual|^4 * n_points overflows float64 (max about 1.8e308, common practice) is a failed
    # fit with a message, never an inf curve; both the dense and the outcome-by-outcome
    # tally must apply it, without floating-point warnings
    import warnings

    from complexity.accumulate import guard_overflow, tally

    rng = np.random.default_rng(0)
    outs = []
    for b in range(3):
        test = np.flatnonzero(rng.random(n) < 0.4)
        res = rng.normal(size=(test.size, 3))
        if b == 1:
            res[:, 2] *= 1e80  # (1e80)^4 overflows
        outs.append(Outcome(b, b, test, res, np.ones(3)))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        t = tally(outs, n, 3)
    expected = [(o.index, guard_overflow(o, n).failures) for o in outs if o.index == 1]
    assert t.failures == expected and 2 in expected[0][1]
    assert np.isfinite(t.loss).all() and np.isfinite(t.mean).all() and np.isfinite(t.m2).all()
    assert t.n_ok[1].tolist() == [outs[1].test.size, outs[1].test.size, 0]


@settings(max_examples=30, deadline=None)
@given(st.integers(0, 10_000), st.integers(1, 6), st.sampled_from([1.0, 1e75, 1e76, 1e80]))
def test_block_overflow_guard_equals_the_per_outcome_guard(seed, K, size):
    # law (the guard's own definition): a capacity fails when |residual|^4 * n_points overflows
    # float64 (max about 1.8e308, common practice) or a residual is NaN; checking a block at
    # once must mark exactly what checking each outcome does, with the same messages.
    from complexity.accumulate import guard_block as _guard_block
    from complexity.accumulate import guard_overflow as _guard_overflow

    rng = np.random.default_rng(seed)
    n_points, C = 50, 3
    outcomes = []
    for b in range(K):
        test = np.flatnonzero(rng.random(n_points) < 0.4)
        res = rng.normal(size=(test.size, C)) * size * rng.choice([1e-80, 1.0], C)
        failures = {}
        if test.size and rng.random() < 0.3:
            res[0, 2] = np.nan  # an unreported NaN prediction
        if rng.random() < 0.3:
            res[:, 1] = np.nan
            failures = {1: "reported"}
        outcomes.append(Outcome(b, b, test, res, np.ones(C), failures))
    each = [_guard_overflow(o, n_points) for o in outcomes]
    block = _guard_block(outcomes, n_points)
    for a, b in zip(each, block):
        assert a.failures == b.failures
        np.testing.assert_array_equal(a.residuals, b.residuals)
        np.testing.assert_array_equal(a.train_mse, b.train_mse)
    huge = any(np.any(np.abs(o.residuals[:, [0, 2]]) > 1e78) for o in outcomes)
    if huge:  # (1e78)^4 overflows float64: the guard must have caught it
        assert any(len(o.failures) > len(p.failures) for o, p in zip(each, outcomes))


def _adversarial(n, C, B, offset, spread, seed):
    """Residuals offset + spread * noise; every 7th resample fails at capacity 1 (NaN column)."""
    rng = np.random.default_rng(seed)
    res = offset + spread * rng.normal(size=(B, n, C)) * rng.uniform(0.5, 1.5, (1, n, 1))
    keep = rng.random((B, n)) < 0.4
    outs = []
    for b in range(B):
        test = np.flatnonzero(keep[b])
        r = res[b, test].copy()
        failures = {1: "failed"} if b % 7 == 3 else {}
        if failures:
            r[:, 1] = np.nan
        outs.append(Outcome(b, b, test, r, np.zeros(C), failures))
    scored = keep[:, :, None] & ~((np.arange(B) % 7 == 3)[:, None, None] & (np.arange(C) == 1))
    return outs, res, scored


@pytest.mark.parametrize(
    "offset, spread",
    [(0.0, 1.0), (1e8, 1e-3), (-1e12, 1.0), (1e6, 1e-6), (3.0, 1e-12)],
    ids=["plain", "large-offset-small-spread", "huge-offset", "tiny-spread", "spread-1e-12"],
)
@pytest.mark.parametrize("n, K", [(40, 7), (40, 60), (20_000, 4)], ids=["dense", "one", "streamed"])
def test_moments_match_a_two_pass_reference_on_adversarial_data(n, K, offset, spread):
    # reference: numpy's two-pass mean and sum of squared deviations of each point's residuals.
    # Bound (rounding analysis of the pairwise/Welford update, Chan, Golub & LeVeque 1983;
    # the form below is common practice): with k values, mean within k eps (|mean| + s) and M2
    # within k eps (M2 + |mean| sqrt(k M2)), s = sqrt(M2 / k). A plain sum of squares would miss
    # the large-offset cases by a factor of about (offset / spread)^2 eps, far outside it.
    C, B = 3, 60 if n < 1000 else 12
    outs, res, scored = _adversarial(n, C, B, offset, spread, seed=n + K)
    acc = PointAccumulator(n, C, B, B)
    for start in range(0, B, K):
        acc.add_block(outs[start : start + K])
    k = scored.sum(axis=0).astype(float)  # (n, C)
    np.testing.assert_array_equal(acc.count, k)
    vals = np.where(scored, res, np.nan)
    two = k >= 2
    with warnings.catch_warnings():  # points never scored: NaN, excluded below
        warnings.simplefilter("ignore", RuntimeWarning)
        mean = np.nanmean(vals, axis=0)
        m2 = np.nansum((vals - mean) ** 2, axis=0)
    eps = np.finfo(np.float64).eps
    s = np.sqrt(m2 / np.maximum(k, 1))
    mean_bound = k * eps * (np.abs(mean) + s)
    m2_bound = k * eps * (m2 + np.abs(mean) * np.sqrt(k * m2)) + 1e-300
    assert np.all(np.abs(acc.mean - mean)[two] <= mean_bound[two])
    assert np.all(np.abs(acc.m2 - m2)[two] <= m2_bound[two])
    assert np.all(acc.m2[k == 1] == 0.0) and np.all(acc.mean[k == 0] == 0.0)


@pytest.mark.parametrize("n", [30, 20_000], ids=["dense", "streamed"])
def test_tally_count_has_one_shape_and_meaning_before_and_after_a_failed_fit(n):
    # definition (complexity.accumulate.Tally.count): per point and capacity, the block's
    # resamples whose fit at that capacity scored the point; shape (n_points, n_capacities)
    # whether or not some fit failed. Reference: counted directly from the outcomes.
    from complexity.accumulate import tally

    C, B = 3, 6
    outs, _, scored = _adversarial(n, C, B, 0.0, 1.0, seed=5)
    clean = [o for o in outs if not o.failures]
    t_clean, t_failed = tally(clean, n, C), tally(outs, n, C)
    assert t_clean.count.shape == t_failed.count.shape == (n, C)
    ok = np.array([not o.failures for o in outs])
    np.testing.assert_array_equal(t_clean.count, scored[ok].sum(axis=0))
    np.testing.assert_array_equal(t_failed.count, scored.sum(axis=0))
    assert (t_failed.count[:, 1] < t_failed.count[:, 0]).any()  # capacity 1 failed once
    acc = PointAccumulator(n, C, B, B)
    acc.merge(t_clean)
    assert acc.count.shape == (n, C)
