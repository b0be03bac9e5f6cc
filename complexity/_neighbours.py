"""Exact nearest neighbours of every row of a matrix among its other rows.

Two questions are answered, both for every row ``i`` of ``Z`` (n x p) and in squared Euclidean
distance computed from the coordinate differences, ``d2(i, j) = sum_l (z_il - z_jl)^2``:

* ``k_nearest``: the ``k`` nearest other rows, ordered by (distance, row index);
* ``nearest_other``: the nearest other row, where distances within a relative ``1e-9`` of the
  smallest count as a tie and the tie goes to the lowest row index.

How the candidates are found depends on the dimension (both routes give the same answer):

* **products** (``p`` above ``_TREE_MAX_COLUMNS``, 6): row blocks of ``||z_j||^2 - 2 z_i . z_j``
  from one BLAS product of ``[Z, 1]`` with ``[-2 Z, ||z||^2]^T`` (the block bounded by
  ``block_bytes``); per row a threshold from a strided subset of the columns; every pair within
  the threshold plus a rounding margin is a candidate;
* **tree** (low dimension): ``scipy.spatial.cKDTree`` queries for a few more neighbours than
  asked; the rare rows whose tied neighbours do not fit (many duplicates) take the products.

The products are in single precision (half the time of double, and half the memory passes
over each block); the margin below is set for the precision used. The candidates' distances
are then recomputed in double precision from coordinate differences and ordered by
(distance, index), so the result depends on neither the route nor the block layout. The
margin is what makes the products exact: the product value of a pair differs from its
difference value by at most ``(5p + 12) u (||z_i||^2 + ||z_j||^2)`` for centred ``Z`` (``u``
the unit roundoff; ``gamma_(p+1)`` bounds for the product and the squared norms, ``(p + 2) u
d2`` for the sum of squared differences with ``d2 <= 2 (||z_i||^2 + ||z_j||^2)``, two more
``u`` for the centring; Higham 2002, section 3.1), so a threshold of twice that bound above the
``k``-th value, doubled again for safety, keeps every row whose difference value can reach the
answer (single precision adds a few ``u`` for the conversion, inside the safety factor). In
single precision that margin is about ``1e-4`` relative at p = 50: the candidates are the
answer and its near-ties, a few per row; the recheck decides among them.
"""

from __future__ import annotations

from collections.abc import Iterator
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy.spatial import cKDTree

__all__ = ["k_nearest", "nearest_other"]

# Two neighbour distances within this relative gap count as a tie (broken by lowest index).
_TIE_RTOL = 1e-9

# Upper bound on the bytes of one block of the product route (the single-precision product
# block, its compare mask and the threshold's subset). Measured at n = 20,000 x 51 on this
# machine (2 cores, OpenBLAS): a product of 64 rows took 3-4x the time per row of 256 or more,
# so the budget must give a few hundred rows at that n; 64 MiB gives about 600.
_BLOCK_BYTES = 64 * 2**20

# The tree is used up to this many columns, the products above. Measured at n = 20,000 normal
# rows, k = 20 (seconds, tree / products, one run each on a loaded 2-core machine): p = 4:
# 3.0 / 13.4; p = 6: 12.4 / 15.8; p = 8: 33.5 / 15.3 (first neighbour only: p = 6: 6.7 / 9.7,
# p = 8: 16.7 / 9.7). The tree's cost grows quickly with p, the products' slowly.
_TREE_MAX_COLUMNS = 6

# The tree is asked for this many neighbours beyond the ones needed, so that ties at the last
# place are usually seen without a second search (each one costs a few per cent of the query).
_TREE_EXTRA = 2

# Every how many-th column the product route reads for its per-row threshold (at most).
_THRESHOLD_STRIDE = 8

# The tighter guess of the product route's threshold: the ceil(k / stride) + this-th smallest
# of the subset (about k + 8 x this values of the row lie under it; rows where it fails are
# redone with the safe bound).
_GUESS_EXTRA = 4

# Candidate pairs whose differences are recomputed at once (bounds that step's memory).
_RECHECK_PAIRS = 1 << 15

# Rows per tree query (bounds the memory of the returned neighbour lists).
_TREE_ROWS = 4096


def k_nearest(
    Z: NDArray[np.float64],
    k: int,
    *,
    route: str = "auto",
    block_bytes: int = _BLOCK_BYTES,
) -> tuple[NDArray[np.float64], NDArray[np.intp]]:
    """Squared distances and indices of the ``k`` nearest other rows of every row.

    Parameters
    ----------
    Z : ndarray of shape (n, p)
        Finite coordinates, n >= 2; not modified.
    k : int
        Neighbours per row, 1 <= k <= n - 1.
    route : {"auto", "tree", "products"}, default="auto"
        How candidates are found (the answer is the same); ``"auto"`` takes the tree up to
        ``_TREE_MAX_COLUMNS`` columns.
    block_bytes : int, default=64 MiB
        Memory bound of one block of the product route.

    Returns
    -------
    d2 : ndarray of shape (n, k)
        Squared distances from coordinate differences, ascending along each row.
    idx : ndarray of shape (n, k)
        The neighbours' row indices; equal distances are ordered by index.

    Examples
    --------
    >>> import numpy as np
    >>> Z = np.array([[0.0, 0.0], [1.0, 0.0], [0.0, 1.0], [3.0, 3.0]])
    >>> d2, idx = k_nearest(Z, 2)
    >>> idx.tolist()
    [[1, 2], [0, 2], [0, 1], [1, 2]]
    >>> d2[0].tolist(), d2[3].tolist()
    ([1.0, 1.0], [13.0, 13.0])
    """
    n = Z.shape[0]
    d2_out = np.empty((n, k))
    idx_out = np.empty((n, k), dtype=np.intp)
    for ids, rows, cols, d2 in _ordered_candidates(Z, k, 0.0, route, block_bytes):
        take = np.searchsorted(rows, ids)[:, None] + np.arange(k)
        d2_out[ids] = d2[take]
        idx_out[ids] = cols[take]
    return d2_out, idx_out


def nearest_other(
    Z: NDArray[np.float64],
    *,
    route: str = "auto",
    block_bytes: int = _BLOCK_BYTES,
) -> NDArray[np.intp]:
    """Index of the nearest other row of every row; near-ties go to the lowest index.

    Among the rows whose distance to row ``i`` is within a relative ``1e-9`` of the smallest,
    the one with the lowest index is returned.

    Parameters
    ----------
    Z : ndarray of shape (n, p)
        Finite coordinates, n >= 2; not modified.
    route : {"auto", "tree", "products"}, default="auto"
        As for ``k_nearest``.
    block_bytes : int, default=64 MiB
        As for ``k_nearest``.

    Returns
    -------
    ndarray of shape (n,)
        Row indices.

    Examples
    --------
    >>> import numpy as np
    >>> nearest_other(np.array([[0.0], [2.0], [1.0], [1.0 + 1e-12]])).tolist()
    [2, 2, 3, 2]
    """
    n = Z.shape[0]
    out = np.empty(n, dtype=np.intp)
    slack = (1.0 + _TIE_RTOL) ** 2 - 1.0
    for ids, rows, cols, d2 in _ordered_candidates(Z, 1, slack, route, block_bytes):
        starts = np.searchsorted(rows, ids)
        dist = np.sqrt(d2)
        nearest = np.repeat(dist[starts], np.diff(np.append(starts, rows.size)))
        tied = dist <= nearest * (1.0 + _TIE_RTOL)
        out[ids] = np.minimum.reduceat(np.where(tied, cols, n), starts)
    return out


_Chunk = tuple[NDArray[np.intp], NDArray[np.intp], NDArray[np.intp], NDArray[np.float64]]


def _ordered_candidates(
    Z: NDArray[np.float64], k: int, slack: float, route: str, block_bytes: int
) -> Iterator[_Chunk]:
    """Candidate pairs by chunks of rows: ``(ids, rows, cols, d2)``.

    ``ids`` are the chunk's rows (ascending); the pairs are sorted by row, then by the
    difference value ``d2``, then by column. Each row's candidates include every other row
    ``j`` whose ``d2(i, j)`` is at most ``(1 + slack)`` times the ``k``-th smallest of row ``i``
    (so there are at least ``k``).
    """
    n, p = Z.shape
    if not 1 <= k <= n - 1:
        raise ValueError(f"k must be between 1 and n - 1 = {n - 1}; got {k!r}.")
    if route not in ("auto", "tree", "products"):
        raise ValueError(f"route must be 'auto', 'tree' or 'products'; got {route!r}.")
    centred = Z - Z.mean(axis=0)  # distances do not change; the rounding margin shrinks
    sq = np.einsum("ij,ij->i", centred, centred)
    if not np.all(np.isfinite(sq)):
        raise ValueError("Z has values too large for squared distances (overflow).")
    use_tree = route == "tree" or (route == "auto" and p <= _TREE_MAX_COLUMNS)
    if use_tree:
        chunks = _tree_candidates(centred, sq, k, slack, block_bytes)
    else:
        chunks = _product_candidates(centred, sq, np.arange(n), k, slack, block_bytes)
    for ids, rows, cols in chunks:
        d2 = np.empty(rows.size)
        for s in range(0, rows.size, _RECHECK_PAIRS):
            diff = Z[rows[s : s + _RECHECK_PAIRS]] - Z[cols[s : s + _RECHECK_PAIRS]]
            d2[s : s + _RECHECK_PAIRS] = np.square(diff).sum(axis=1)
        order = np.lexsort((cols, d2, rows))
        yield ids, rows[order], cols[order], d2[order]


def _margin(sq: NDArray[np.float64], p: int, dtype: type[np.floating[Any]]) -> NDArray[np.float64]:
    """Per-row rounding margin for values computed in ``dtype`` (see the module docstring).

    The bound, times 2 (either of two values may be the smaller), times 2 for safety.
    """
    unit_roundoff = float(np.finfo(dtype).eps) / 2.0
    margin: NDArray[np.float64] = 4.0 * (5 * p + 12) * unit_roundoff * (sq + sq.max())
    return margin


def _threshold(
    kth: NDArray[np.float64], slack: float, margin: NDArray[np.float64]
) -> NDArray[np.float64]:
    """Largest squared distance a candidate may have, from the ``k``-th one of its row."""
    return (kth + margin) * (1.0 + slack) + margin


def _product_candidates(
    Z: NDArray[np.float64],
    sq: NDArray[np.float64],
    ids: NDArray[np.intp],
    k: int,
    slack: float,
    block_bytes: int,
) -> Iterator[tuple[NDArray[np.intp], NDArray[np.intp], NDArray[np.intp]]]:
    """Candidates of the rows ``ids`` from blocked products (``Z`` centred, ``sq`` its norms).

    The products are in single precision (half the time of double, and of the memory passes
    over each block); the margin is set for single precision accordingly.
    """
    n, p = Z.shape
    margin = _margin(sq, p, np.float32)
    # h_ij = ||z_j||^2 - 2 z_i . z_j = d2(i, j) - ||z_i||^2: one product, nothing to add
    left = np.hstack([Z, np.ones((n, 1))]).astype(np.float32)
    right = np.ascontiguousarray(np.hstack([-2.0 * Z, sq[:, None]]).T, dtype=np.float32)
    stride = max(1, min(_THRESHOLD_STRIDE, (n - 1) // (k + 1)))
    per_row = 5 * n + 4 * (n // stride + 1)  # the float block, its mask, the subset's copy
    block = int(max(1, min(ids.size, block_bytes // per_row)))
    for b0 in range(0, ids.size, block):
        own = ids[b0 : b0 + block]
        b = own.size
        H = left[own] @ right
        H[np.arange(b), own] = np.inf
        base = sq[own]
        local = margin[own]
        if k == 1:
            exact_first = H.min(axis=1)
            limit = _single_at_least(_threshold(exact_first + base, slack, local) - base)
            rr, cc = np.divmod(np.flatnonzero(H <= limit[:, None]), n)
        else:
            rr, cc = _block_candidates(H, base, local, k, slack, stride)
        del H
        yield own, own[rr], cc


def _block_candidates(
    H: NDArray[np.float32],
    base: NDArray[np.float64],
    margin: NDArray[np.float64],
    k: int,
    slack: float,
    stride: int,
) -> tuple[NDArray[np.intp], NDArray[np.intp]]:
    """Candidates ``(row, col)`` of one product block ``H`` (rows ascending), for k >= 2.

    The ``k``-th smallest of a subset of every ``stride``-th column bounds the row's ``k``-th
    from above (safe); a lower order of the subset is a tighter guess, kept for the rows where
    it provably holds: at least ``k`` values under it and their ``k``-th's own threshold
    under it too. The other rows are redone with the safe bound.
    """
    n = H.shape[1]
    guess_order = min(k, -(-k // stride) + _GUESS_EXTRA)
    orders = sorted({guess_order - 1, k - 1})
    subset = np.partition(H[:, ::stride], orders, axis=1)
    guess = _single_at_least(_threshold(subset[:, guess_order - 1] + base, slack, margin) - base)
    rr, cc = np.divmod(np.flatnonzero(H <= guess[:, None]), n)
    values = H[rr, cc].astype(np.float64)
    counts = np.bincount(rr, minlength=H.shape[0])
    held = counts >= k
    kth = np.full(H.shape[0], np.inf)
    kth[held] = _kth_per_row(rr, values, held, k)
    limit = _single_at_least(_threshold(kth + base, slack, margin) - base)
    held &= limit <= guess
    keep = held[rr] & (values <= limit[rr])
    rr, cc = rr[keep], cc[keep]
    redo = np.flatnonzero(~held)
    if redo.size == 0:
        return rr, cc
    safe = _single_at_least(
        _threshold(subset[redo, k - 1] + base[redo], slack, margin[redo]) - base[redo]
    )
    r2, c2 = np.divmod(np.flatnonzero(H[redo] <= safe[:, None]), n)
    v2 = H[redo[r2], c2].astype(np.float64)
    kth2 = _kth_per_row(r2, v2, np.ones(redo.size, dtype=bool), k)
    limit2 = _single_at_least(_threshold(kth2 + base[redo], slack, margin[redo]) - base[redo])
    keep2 = v2 <= limit2[r2]
    rows = np.concatenate([rr, redo[r2[keep2]]])
    cols = np.concatenate([cc, c2[keep2]])
    order = np.argsort(rows, kind="stable")
    return rows[order], cols[order]


def _single_at_least(values: NDArray[np.float64]) -> NDArray[np.float32]:
    """``values`` in single precision, rounded up (so no candidate is lost to the rounding)."""
    single = values.astype(np.float32)
    low = single.astype(np.float64) < values
    single[low] = np.nextafter(single[low], np.float32(np.inf))
    return single


def _kth_per_row(
    rows: NDArray[np.intp], values: NDArray[np.float64], wanted: NDArray[np.bool_], k: int
) -> NDArray[np.float64]:
    """The ``k``-th smallest of ``values`` in each ``wanted`` row (``rows`` ascending; each
    wanted row has at least ``k`` values).

    The values are laid out one row per line, padded with inf, and partitioned along the lines
    (measured 3.5x faster than a two-key sort for a block of 610 rows of 25-90 values).
    """
    if not wanted.any():
        return np.empty(0)
    counts = np.bincount(rows, minlength=wanted.size)
    starts = np.cumsum(counts) - counts
    padded = np.full((wanted.size, int(counts.max())), np.inf)
    padded[rows, np.arange(rows.size) - starts[rows]] = values
    kth: NDArray[np.float64] = np.partition(padded[wanted], k - 1, axis=1)[:, k - 1]
    return kth


def _tree_candidates(
    Z: NDArray[np.float64],
    sq: NDArray[np.float64],
    k: int,
    slack: float,
    block_bytes: int,
) -> Iterator[tuple[NDArray[np.intp], NDArray[np.intp], NDArray[np.intp]]]:
    """Candidates from a k-d tree (``Z`` centred).

    Rows whose last returned neighbour is still within reach (many ties or duplicates) may
    have more candidates beyond it; they go through the product route instead.
    """
    n, p = Z.shape
    margin = _margin(sq, p, np.float64)
    n_query = min(n, k + 1 + _TREE_EXTRA)
    tree = cKDTree(Z)
    crowded: list[NDArray[np.intp]] = []
    for r0 in range(0, n, _TREE_ROWS):
        own = np.arange(r0, min(n, r0 + _TREE_ROWS))
        dist, idx = tree.query(Z[own], k=n_query, workers=-1)  # queries on every core
        dist = dist.reshape(own.size, n_query)
        idx = idx.reshape(own.size, n_query)
        d2 = dist * dist
        other = idx != own[:, None]
        kth = np.partition(np.where(other, d2, np.inf), k - 1, axis=1)[:, k - 1]
        limit = _threshold(kth, slack, margin[own])
        full = d2[:, -1] <= limit if n_query < n else np.zeros(own.size, dtype=bool)
        keep = other & (d2 <= limit[:, None]) & ~full[:, None]
        rows = np.broadcast_to(own[:, None], idx.shape)[keep]
        crowded.append(own[full])
        yield own[~full], rows, idx[keep]
    rest = np.concatenate(crowded)
    if rest.size:
        yield from _product_candidates(Z, sq, rest, k, slack, block_bytes)
