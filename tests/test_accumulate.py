"""Tests for complexity.accumulate: the streaming sums equal the direct computation."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from complexity.accumulate import PointAccumulator
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
