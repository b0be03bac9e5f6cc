"""Exact nearest neighbours of every row of a matrix among its other rows (temporary move)."""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray
from scipy.spatial import cKDTree  # type: ignore[import-untyped]  # no stubs installed

# Two neighbour distances within this relative gap count as a tie (broken by lowest index).
_TIE_RTOL = 1e-9

# Rows per block in the brute-force neighbour search (memory ~ block * n * 4 bytes).
_BLOCK_ROWS = 1024


def nearest_other(Z: NDArray[np.float64]) -> NDArray[np.intp]:
    """Index of the nearest other row of ``Z``; ties go to the lowest index."""
    n, p = Z.shape
    tree = cKDTree(Z)
    k = min(n, max(8, 2 * p + 2))  # room for the 2p equidistant neighbours of a grid point
    dist, idx = tree.query(Z, k=k)
    rows = np.arange(n)
    other = idx != rows[:, None]
    nearest = np.where(other, dist, np.inf).min(axis=1)
    tied = other & (dist <= nearest[:, None] * (1.0 + _TIE_RTOL))
    choice = np.where(tied, idx, n).min(axis=1)
    if k < n:
        # every returned neighbour is tied: more tied rows may lie beyond the k returned
        crowded = np.flatnonzero(tied.sum(axis=1) == other.sum(axis=1))
        if crowded.size:
            balls = tree.query_ball_point(Z[crowded], r=nearest[crowded] * (1.0 + _TIE_RTOL))
            for row, ball in zip(crowded, balls, strict=True):
                choice[row] = min(j for j in ball if j != row)
    return choice


def k_nearest(Z: NDArray[np.float64], k: int) -> tuple[NDArray[np.float64], NDArray[np.intp]]:
    """Squared distances and indices of the ``k`` nearest other rows, ordered (distance, index).

    Candidates come from single-precision matrix products in row blocks, with a threshold from
    a strided subset of the columns and a margin that covers single-precision rounding (a
    bound of ``(2p + 3) eps`` relative to ``||z_i||^2 + ||z_j||^2``, doubled); the
    candidates' distances are then recomputed in double precision from coordinate differences,
    so the result does not depend on the block layout.
    """
    n, p = Z.shape
    sq64 = np.einsum("ij,ij->i", Z, Z)
    # Per row i, ||z_i - z_j||^2 = ||z_i||^2 + 2 h_ij with h_ij = ||z_j||^2 / 2 - z_i . z_j,
    # one product of [Z, 1] with [-Z, ||z||^2 / 2]^T.
    left = np.hstack([Z, np.ones((n, 1))]).astype(np.float32)
    right = np.hstack([-Z, 0.5 * sq64[:, None]]).astype(np.float32)
    margin = 4.0 * (p + 4) * float(np.finfo(np.float32).eps) * (sq64 + sq64.max())
    step = max(1, min(8, (n - 1) // (k + 1)))
    d2_out = np.empty((n, k))
    idx_out = np.empty((n, k), dtype=np.intp)
    for r0 in range(0, n, _BLOCK_ROWS):
        r1 = min(n, r0 + _BLOCK_ROWS)
        b = r1 - r0
        H = left[r0:r1] @ right.T
        H[np.arange(b), np.arange(r0, r1)] = np.inf
        tau = np.partition(H[:, ::step], k - 1, axis=1)[:, k - 1].astype(np.float64)
        flat = np.flatnonzero(H <= (tau + margin[r0:r1]).astype(np.float32)[:, None])
        del H
        rr, cc = np.divmod(flat, n)
        d2 = np.empty(rr.size)
        for s in range(0, rr.size, 1 << 16):
            diff = Z[r0 + rr[s : s + (1 << 16)]] - Z[cc[s : s + (1 << 16)]]
            d2[s : s + (1 << 16)] = np.einsum("ij,ij->i", diff, diff)
        order = np.lexsort((cc, d2, rr))
        rr, cc, d2 = rr[order], cc[order], d2[order]
        starts = np.searchsorted(rr, np.arange(b))
        take = starts[:, None] + np.arange(k)
        d2_out[r0:r1] = d2[take]
        idx_out[r0:r1] = cc[take]
    return d2_out, idx_out
