"""The numerics of the exact engine: nested least squares for a stack of training sets.

Notation. Z(x) is the ladder's design (:mod:`complexity.lstsq.design`); capacity c uses its
first n_cols[c] columns. One Householder QR of the reference design, Z_ref = Q0 R0
(:func:`complexity.lstsq.nested.householder`), gives basis functions q(x) = Z(x) R0^{-1} that
are orthonormal over the reference rows and nested like Z. A training set is a weight vector c
(bootstrap multiplicities, 0/1 for folds) over the rows. Its Gram matrix G = Q0^T diag(c) Q0 and
g = Q0^T diag(c) y come, for a whole chunk of resamples, from ONE matrix product
(counts @ [q_j q_k, q_j y], :func:`products`, :func:`moments`). With the Cholesky factor
G = L L^T (:func:`from_gram`), the columns of U = Q0 L^{-T} are orthonormal in the weighted
metric and still nested, so with w = L^{-1} g every capacity follows: coefficients (in q) of
capacity c are L^{-T}[:, :k] w[:k] (a cumulative sum, :func:`nested_coefficients`), training
RSS_c = RSS_top + sum_{k_c <= j < top} w_j^2 (a tail sum, :func:`tail_sums`: no cancellation).
A resample whose Gram matrix is badly conditioned is redone with a QR of its own weighted rows
(:func:`from_rows`: same outputs, R^{-1} and z = Qw^T sqrt(c) y). All reductions run
single-threaded on fixed shapes, with every resample at a fixed row of its chunk, so results are
bit-identical for any n_jobs and for any subset of resamples (a resumed checkpoint).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import scipy.linalg
from numpy.typing import NDArray

from ..lstsq.design import NestedDesign
from ..lstsq.nested import householder, valid_prefix

__all__ = [
    "Reference",
    "chunk_size",
    "failed_mask",
    "from_gram",
    "from_rows",
    "moments",
    "nested_coefficients",
    "products",
    "rank_tol",
    "reference",
    "tail_sums",
]

CHUNK_DOUBLES = 4_000_000  # bound on the doubles of one chunk's work arrays (about 32 MB)
# resamples per chunk: the largest of these that fits (round numbers, so usual resample counts
# fill their chunks); it depends on n only, never on which resamples are asked for
CHUNK_SIZES = (10, 20, 25, 50, 100, 200, 250, 500, 1000)


def rank_tol(n: int, P: int) -> float:
    return 10.0 * max(n, P) * np.finfo(np.float64).eps


@dataclass
class Reference:
    """The reference factorisation and everything shared by all resamples."""

    design: NestedDesign
    Q0: NDArray[np.float64]  # (n_ref, pv) orthonormal columns over the reference rows
    R0inv: NDArray[np.float64]  # (pv, pv)
    pv: int  # usable leading columns (numerical rank of the reference design)
    n_cols: NDArray[np.intp]  # per capacity
    chunk: int  # resamples per chunk (fixed from the shapes only)


def reference(Z_ref: NDArray[np.float64], design: NestedDesign) -> Reference:
    """One Householder QR of the reference design (:func:`complexity.lstsq.nested.householder`)."""
    n, P = Z_ref.shape
    R, Q, _ = householder(Z_ref)
    pv = valid_prefix(np.diag(R), rank_tol(n, P))
    Q0 = np.ascontiguousarray(Q[:, :pv])
    R0inv = scipy.linalg.solve_triangular(R[:pv, :pv], np.eye(pv)) if pv else np.zeros((0, 0))
    chunk = chunk_size(n, len(design.n_columns), design.n_design)
    return Reference(design, Q0, R0inv, pv, np.asarray(design.n_columns, dtype=np.intp), chunk)


def chunk_size(n_rows: int, n_capacities: int, n_design: int) -> int:
    """Resamples per chunk: a function of the reference rows, capacities and columns only.

    Examples
    --------
    >>> chunk_size(20_000, 16, 16), chunk_size(235, 1, 231)
    (25, 10)
    """
    # per resample: counts (n) and residuals (about n/2 x C for out-of-bag rows), or the Gram
    # matrix with its Cholesky factor, inverse and transpose (4 x P^2), whichever is larger
    per = max(n_rows * max(1, n_capacities // 2), 4 * n_design * n_design, 1)
    fit_in = CHUNK_DOUBLES // per
    return max([size for size in CHUNK_SIZES if size <= fit_in], default=CHUNK_SIZES[0])


# -------------------------------------------------------------------- batched nested solves


def from_gram(
    G: NDArray[np.float64], g: NDArray[np.float64], pv: NDArray[np.intp]
) -> tuple[NDArray, NDArray, NDArray, NDArray[np.bool_]]:
    """Cholesky route for a stack of Gram matrices.

    Returns ``(Tinv, w, cond_bound, ok)``: ``Tinv = L^{-T}`` (upper), ``w = L^{-1} g``, an upper
    bound of cond(G_k) for every leading block k, and False where Cholesky failed.
    """
    S, P, _ = G.shape
    G = G.copy()
    g = g.copy()
    for s in np.flatnonzero(pv < P):  # columns beyond a resample's usable prefix: identity
        k = pv[s]
        G[s, k:, :] = 0.0
        G[s, :, k:] = 0.0
        G[s, np.arange(k, P), np.arange(k, P)] = 1.0
        g[s, k:] = 0.0
    ok = np.ones(S, dtype=bool)
    try:
        L = np.linalg.cholesky(G)
    except np.linalg.LinAlgError:
        L = np.zeros_like(G)
        for i in range(S):
            try:
                L[i] = np.linalg.cholesky(G[i])
            except np.linalg.LinAlgError:
                ok[i] = False
                L[i] = np.eye(P)
    Linv = np.linalg.inv(L)
    w = np.einsum("sij,sj->si", Linv, g)
    rows_L = np.cumsum(np.sum(L**2, axis=2), axis=1)
    rows_Li = np.cumsum(np.sum(Linv**2, axis=2), axis=1)
    cond_bound = rows_L * rows_Li  # (||L_k||_F ||L_k^{-1}||_F)^2 >= cond(G_k)
    return np.transpose(Linv, (0, 2, 1)), w, cond_bound, ok


def from_rows(
    A: NDArray[np.float64], v: NDArray[np.float64], pv: int
) -> tuple[NDArray, NDArray, int]:
    """QR route for one resample's weighted rows ``A`` (m, P) and response ``v`` (m,).

    Returns ``(Tinv, w, pv)`` with ``Tinv = R^{-1}`` on the usable prefix (identity after it),
    ``w = Qw^T v`` and the usable prefix after the rank check.
    """
    m, P = A.shape
    Tinv = np.eye(P)
    w = np.zeros(P)
    if pv == 0 or m == 0:
        return Tinv, w, 0
    Qw, R = np.linalg.qr(A[:, :pv])
    keep = min(pv, valid_prefix(np.diag(R), rank_tol(m, P)))
    if keep:
        Tinv[:keep, :keep] = scipy.linalg.solve_triangular(R[:keep, :keep], np.eye(keep))
        w[:keep] = Qw[:, :keep].T @ v
    return Tinv, w, keep


def nested_coefficients(
    Tinv: NDArray[np.float64], w: NDArray[np.float64], n_cols: NDArray[np.intp]
) -> NDArray[np.float64]:
    """Coefficients in the q basis for every capacity: ``Tinv[:, :k] @ w[:k]``, shape (S, P, C)."""
    cum = np.cumsum(Tinv * w[:, None, :], axis=2)
    # capacities past the usable columns are failures; clip so their (unused) index is valid
    return cum[:, :, np.clip(n_cols, 1, Tinv.shape[2]) - 1]


def products(Q0: NDArray, yc: NDArray, iu: tuple[NDArray, NDArray]) -> NDArray[np.float64]:
    """Columns ``q_j q_k`` (j <= k), ``q_j y`` and ``y^2`` of the count-weighted moments.

    Column order is that of ``iu`` (``numpy.triu_indices``: row by row), written in place.
    """
    n, P = Q0.shape
    m = iu[0].size
    out = np.empty((n, m + P + 1))
    start = 0
    for j in range(P):  # the products q_j q_k for k >= j: one broadcast multiply per j
        np.multiply(Q0[:, j : j + 1], Q0[:, j:], out=out[:, start : start + P - j])
        start += P - j
    np.multiply(Q0, yc[:, None], out=out[:, m : m + P])
    np.multiply(yc, yc, out=out[:, m + P])
    return out


def moments(
    counts: NDArray[np.float64], Q0: NDArray, yc: NDArray, shared: dict[str, Any]
) -> NDArray[np.float64]:
    """``counts @ products``; for large n in fixed row blocks, so the products never fill memory."""
    if shared["QQ"] is not None:
        return counts @ shared["QQ"]
    block = shared["row_block"]
    total = np.zeros((counts.shape[0], shared["n_products"]))
    for start in range(0, Q0.shape[0], block):
        rows = slice(start, start + block)
        total += counts[:, rows] @ products(Q0[rows], yc[rows], shared["iu"])
    return total


def tail_sums(w: NDArray[np.float64]) -> NDArray[np.float64]:
    """``out[s, j] = sum_{i >= j} w[s, i]^2`` with a trailing zero column (shape (S, P + 1))."""
    S, P = w.shape
    out = np.zeros((S, P + 1))
    out[:, :P] = np.cumsum((w**2)[:, ::-1], axis=1)[:, ::-1]
    return out


def failed_mask(failures: dict[int, str], C: int) -> NDArray[np.bool_]:
    bad = np.zeros(C, dtype=bool)
    bad[list(failures)] = True
    return bad
