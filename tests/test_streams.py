"""Bulk bootstrap draws equal numpy's literal per-resample draws.

Reference: numpy itself (a general-purpose library). Each check builds the child seed with
``numpy.random.SeedSequence(entropy, spawn_key=...)`` and draws with
``numpy.random.default_rng(child).integers(0, n, size)``, exactly what a sweep promises per
resample (DESIGN: one spawned child per resample), and compares the bulk route bit for bit.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from complexity._streams import _bounded, bootstrap_draws, child_states


def _literal_state(entropy, spawn_key, i):
    return np.random.SeedSequence(entropy, spawn_key=(*spawn_key, i)).generate_state(4, np.uint64)


def _literal_draw(entropy, spawn_key, i, n, size):
    child = np.random.SeedSequence(entropy, spawn_key=(*spawn_key, i))
    return np.random.default_rng(child).integers(0, n, size=size)


@pytest.mark.parametrize(
    "entropy",
    [0, 1, 2**32 - 1, 2**32, 12345678901234567890123456789, 2**127 + 2**64 + 5],
)
@pytest.mark.parametrize("spawn_key", [(), (3,), (1, 2, 3)])
def test_child_states_equal_numpy(entropy, spawn_key):
    root = np.random.SeedSequence(entropy, spawn_key=spawn_key)
    idx = [0, 1, 2, 17, 4095, 2**32 - 1]
    ours = child_states(root, (0,), idx)
    literal = np.array([_literal_state(entropy, (*spawn_key, 0), i) for i in idx])
    np.testing.assert_array_equal(ours, literal)


def test_child_states_beyond_one_word_fall_back_to_numpy():
    root = np.random.SeedSequence(5)
    ours = child_states(root, (2,), [2**40 + 3])
    np.testing.assert_array_equal(ours[0], _literal_state(5, (2,), 2**40 + 3))


@settings(max_examples=40, deadline=None)
@given(
    entropy=st.integers(0, 2**130),
    first=st.integers(0, 10_000),
    n=st.integers(1, 3_000),
)
def test_bootstrap_draws_equal_literal_draws(entropy, first, n):
    root = np.random.SeedSequence(entropy)
    idx = list(range(first, first + 5))
    for i, ours in zip(idx, bootstrap_draws(root, (0,), idx, n)):
        np.testing.assert_array_equal(ours, _literal_draw(entropy, (0,), i, n, n))


def test_large_ranges_with_frequent_rejections_still_match():
    # n = 3 * 2**30: numpy's bounded draw rejects about a quarter of its 32-bit values here,
    # so this exercises the rejection path (and the fallback when the spare values run out)
    n, size = 3 * 2**30, 200
    root = np.random.SeedSequence(11)
    idx = list(range(20))
    for i, ours in zip(idx, bootstrap_draws(root, (0,), idx, n, size)):
        np.testing.assert_array_equal(ours, _literal_draw(11, (0,), i, n, size))


def test_bounded_rejects_like_lemire_and_reports_short_rows():
    # Lemire (2019, ACM TOMACS 29(1), "Fast random integer generation in an interval"; from
    # memory): value v maps to (v * n) >> 32 and is rejected when (v * n) mod 2**32 < (2**32 - n) % n.
    n = 2**31 + 1  # threshold 2**31 - 1
    rows, ok = _bounded(np.array([[0, 2**32 - 1]], dtype=np.uint64), n, 1)
    assert ok.tolist() == [True]
    assert rows[0].tolist() == [n - 1]  # 0 is rejected (0 < threshold); 2**32 - 1 gives n - 1
    _, ok = _bounded(np.array([[0, 0]], dtype=np.uint64), n, 1)
    assert (
        ok.tolist() == [False]
    )  # both rejected (1 would be accepted: n mod 2**32 >= threshold): the caller falls back to the literal draw


def test_edge_sizes():
    root = np.random.SeedSequence(3)
    assert bootstrap_draws(root, (0,), [], 10) == []
    one = bootstrap_draws(root, (0,), [0, 1], 1)
    assert [o.tolist() for o in one] == [[0], [0]]
    np.testing.assert_array_equal(
        bootstrap_draws(root, (0,), [4], 2)[0], _literal_draw(3, (0,), 4, 2, 2)
    )
