"""The exact neighbour search of ``complexity._neighbours`` against a reference library.

Reference: scipy's ``scipy.spatial.cKDTree.query`` (k nearest in Euclidean distance) and, for
the tie rules, a full sort of all pairwise distances computed from coordinate differences.
``cKDTree.query`` does not promise an order among equal distances, so it is compared by its
distances (to rounding) and by its neighbour sets where the k-th distance is not tied.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.spatial import cKDTree

from complexity._neighbours import _TIE_RTOL, k_nearest, nearest_other

ROUTES = [("tree", 1 << 26), ("products", 1 << 26), ("products", 1), ("products", 40_000)]


def _full_sort(Z, k):
    """k nearest other rows by a full sort of (distance, index); distances from differences."""
    n = len(Z)
    D = ((Z[:, None, :] - Z[None, :, :]) ** 2).sum(axis=2)
    np.fill_diagonal(D, np.inf)
    order = np.lexsort((np.broadcast_to(np.arange(n), (n, n)), D), axis=1)[:, :k]
    return np.take_along_axis(D, order, axis=1), order


def _nearest_by_rule(Z):
    """Nearest other row; distances within a relative 1e-9 of the smallest go to the lowest index."""
    n = len(Z)
    D = np.sqrt(((Z[:, None, :] - Z[None, :, :]) ** 2).sum(axis=2))
    np.fill_diagonal(D, np.inf)
    tied = D <= D.min(axis=1, keepdims=True) * (1.0 + _TIE_RTOL)
    return np.where(tied, np.arange(n), n).min(axis=1)


def _data(kind, n, p, seed):
    rng = np.random.default_rng(seed)
    if kind == "normal":
        return rng.normal(size=(n, p))
    if kind == "lattice":  # small integers: exact ties and duplicated rows
        return rng.integers(0, 3, size=(n, p)).astype(float)
    base = rng.normal(size=(max(1, n // 4), p)) * 10.0 + 5.0  # duplicated rows, off-centre
    return base[rng.integers(0, len(base), n)]


def _check_against_tree(Z, k, d2, idx):
    # scipy cKDTree.query: the k + 1 nearest including the row itself (reference library)
    ref_d, ref_i = cKDTree(Z).query(Z, k=k + 1)
    n = len(Z)
    # drop the row itself; with duplicates it may not come first, so remove it by index
    own = ref_i == np.arange(n)[:, None]
    drop = np.where(own.any(axis=1), own.argmax(axis=1), k)
    keep = np.ones_like(own)
    keep[np.arange(n), drop] = False
    ref_d2 = (ref_d[keep].reshape(n, k)) ** 2
    ref_i = ref_i[keep].reshape(n, k)
    np.testing.assert_allclose(d2, ref_d2, rtol=1e-9, atol=1e-12)
    # where the k-th distance is clearly separated from the next, the neighbour sets agree
    nxt = _full_sort(Z, min(k + 1, n - 1))[0][:, -1] if k + 1 <= n - 1 else np.full(n, np.inf)
    clear = nxt > d2[:, -1] * (1 + 1e-9) + 1e-12
    for row in np.flatnonzero(clear):
        assert set(idx[row]) == set(ref_i[row])


@pytest.mark.parametrize("kind", ["normal", "lattice", "duplicates"])
@pytest.mark.parametrize("p", [1, 2, 5, 9, 30])
@pytest.mark.parametrize(("route", "block_bytes"), ROUTES)
def test_k_nearest_equals_reference(kind, p, route, block_bytes):
    Z = _data(kind, 240, p, seed=p)
    before = Z.copy()
    for k in (1, 3, 20):
        d2, idx = k_nearest(Z, k, route=route, block_bytes=block_bytes)
        ref_d2, ref_idx = _full_sort(Z, k)
        np.testing.assert_array_equal(idx, ref_idx)
        np.testing.assert_allclose(d2, ref_d2, rtol=1e-12, atol=0)
        _check_against_tree(Z, k, d2, idx)
    np.testing.assert_array_equal(Z, before)  # the input is not modified


@pytest.mark.parametrize("kind", ["normal", "lattice", "duplicates"])
@pytest.mark.parametrize("p", [1, 3, 12])
@pytest.mark.parametrize(("route", "block_bytes"), ROUTES)
def test_nearest_other_tie_rule(kind, p, route, block_bytes):
    Z = _data(kind, 300, p, seed=10 + p)
    before = Z.copy()
    got = nearest_other(Z, route=route, block_bytes=block_bytes)
    np.testing.assert_array_equal(got, _nearest_by_rule(Z))
    # cKDTree (reference library): the same distance to the nearest other row
    ref_d, _ = cKDTree(Z).query(Z, k=2)
    np.testing.assert_allclose(np.linalg.norm(Z - Z[got], axis=1), ref_d[:, 1], atol=1e-12)
    np.testing.assert_array_equal(Z, before)


def test_many_copies_beyond_the_tree_query():
    # 60 copies of each of 5 points: every row's 20 nearest are copies at distance 0, far more
    # tied rows than the tree returns, so the crowded rows take the product route
    Z = np.repeat(np.random.default_rng(0).normal(size=(5, 3)), 60, axis=0)
    for route in ("tree", "products"):
        d2, idx = k_nearest(Z, 20, route=route)
        ref_idx = _full_sort(Z, 20)[1]
        np.testing.assert_array_equal(idx, ref_idx)
        assert np.all(d2 == 0.0)
        np.testing.assert_array_equal(nearest_other(Z, route=route), _nearest_by_rule(Z))


def test_near_ties_inside_the_rounding_margin():
    # distances 1 and 1 + 1e-12 (relative gap far below single precision): the products
    # cannot tell them apart, the recheck in double precision must
    Z = np.array([[0.0, 0.0], [1.0 + 1e-12, 0.0], [0.0, 1.0], [5.0, 5.0], [-3.0, 4.0]])
    for route in ("tree", "products"):
        idx = k_nearest(Z, 2, route=route)[1]
        np.testing.assert_array_equal(idx, _full_sort(Z, 2)[1])
        assert idx[0].tolist() == [2, 1]


def test_bad_arguments():
    Z = np.zeros((3, 2))
    with pytest.raises(ValueError, match=r"k must be between 1 and n - 1 = 2; got 3"):
        k_nearest(Z, 3)
    with pytest.raises(ValueError, match=r"route must be 'auto', 'tree' or 'products'; got 'x'"):
        k_nearest(Z, 1, route="x")


@settings(max_examples=60, deadline=None)
@given(
    n=st.integers(2, 60),
    p=st.integers(1, 12),
    k=st.integers(1, 25),
    levels=st.integers(1, 4),
    route=st.sampled_from(["tree", "products"]),
    block_bytes=st.sampled_from([1, 3_000, 1 << 26]),
    seed=st.integers(0, 2**32 - 1),
)
def test_property_equals_full_sort(n, p, k, levels, route, block_bytes, seed):
    # few distinct levels per coordinate make exact ties and duplicated rows common
    rng = np.random.default_rng(seed)
    Z = rng.integers(0, levels + 1, size=(n, p)) * 0.5 + rng.normal(size=p)
    k = min(k, n - 1)
    d2, idx = k_nearest(Z, k, route=route, block_bytes=block_bytes)
    ref_d2, ref_idx = _full_sort(Z, k)
    np.testing.assert_array_equal(idx, ref_idx)
    np.testing.assert_allclose(d2, ref_d2, rtol=1e-12, atol=1e-15)
    np.testing.assert_array_equal(
        nearest_other(Z, route=route, block_bytes=block_bytes), _nearest_by_rule(Z)
    )
