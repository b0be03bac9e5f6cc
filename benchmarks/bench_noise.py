"""Speed of the nearest-neighbour noise estimate against a k-d tree route measured in the same run.

Cases (target from issue 14, item 1: the noise estimate is never the bulk of a sweep):

=====================  ===========================================================
case                   what is timed
=====================  ===========================================================
n = 5,000 x 50         Gamma-test estimate (20 neighbour orders), products route
n = 20,000 x 50        Gamma-test estimate, products route
n = 20,000 x 1         first-neighbour estimate (``noise="neighbours"``), tree route
n = 20,000 x 5         Gamma-test estimate, tree route
=====================  ===========================================================

Timed, interleaved, ``--repeats`` times each (medians reported):

- ``ours``: the exact neighbour search of ``complexity._neighbours`` on the scaled columns, for
  every row (``k_nearest`` with 20 neighbours, or ``nearest_other`` for one column);
- ``estimate``: ``estimate_noise(X, y, noise="neighbours")`` end to end (column scaling, the
  search, the estimate, its effective df and SE), the figure to set beside a sweep;
- ``tree``: the same estimator with its neighbours from ``scipy.spatial.cKDTree.query`` asked
  directly for k + 1 neighbours of every row (the route before the products; for the first
  neighbour it asks for ``max(8, 2p + 2)`` as that route did), the rest of the computation
  the same. In many dimensions a tree query is close to a brute-force scan per point, so at
  ``p = 50`` it is timed on ``--tree-rows`` query rows spread over the data and scaled up
  linearly to n (the table says so); it is then accurate to the scatter of the timing, since
  a query's cost does not depend on the other queries;
- ``sweep`` (context, one run, noise given so it is not estimated twice): ``cx.sweep`` of a
  ``FeatureLadder(range(1, p + 1))`` with 10-fold cross-validation on the same data, to put the
  noise estimate beside what a sweep costs anyway.

Accuracy: the largest relative difference between the two routes' neighbour distances over the
rows both computed (``d2``), the number of those rows whose neighbour lists differ (only tied
distances may be ordered differently: the tree gives no order among ties), and, where the tree
ran on every row, the largest relative difference of the estimates.

    python benchmarks/bench_noise.py [--repeats 3] [--tree-rows 400] [--no-sweep]

Synthetic data: X normal, y = sum of sin over the first five columns + N(0, 0.5^2).
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
import warnings
from pathlib import Path

import numpy as np
from scipy.spatial import cKDTree

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

import complexity as cx
from complexity._neighbours import k_nearest, nearest_other
from complexity._noise_neighbours import _GAMMA_NEIGHBOURS, _scale_columns
from complexity.noise import estimate_noise

CASES = [(5_000, 50), (20_000, 50), (20_000, 1), (20_000, 5)]
FULL_TREE_MAX_COLUMNS = 8  # above this the tree is timed on a subset of query rows


def _data(n: int, p: int, seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p))
    y = np.sin(X[:, : min(p, 5)]).sum(axis=1) + rng.normal(0.0, 0.5, n)
    return X, y


def _tree_neighbours(Z: np.ndarray, k: int, rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The k nearest other rows of ``rows`` from cKDTree.query (the baseline)."""
    n = Z.shape[0]
    dist, idx = cKDTree(Z).query(Z[rows], k=min(n, k + 1))
    own = idx == rows[:, None]
    drop = np.where(own.any(axis=1), own.argmax(axis=1), k)
    keep = np.ones_like(own)
    keep[np.arange(rows.size), drop] = False
    return (dist[keep].reshape(rows.size, k)) ** 2, idx[keep].reshape(rows.size, k)


def _gamma_from(d2: np.ndarray, idx: np.ndarray, y: np.ndarray) -> float:
    """The Gamma-test intercept (METHODS.md 7.6) from given neighbours, as the estimator does."""
    n = idx.shape[0]
    delta = d2.mean(axis=0)
    diff = y[idx] - y[:, None]
    gam = np.einsum("ik,ik->k", diff, diff) / (2.0 * n)
    intercept = np.polyfit(delta, gam, 1)[1]
    return max(float(intercept), 0.0)


def _tree_route(X: np.ndarray, y: np.ndarray, rows: np.ndarray) -> tuple[float, np.ndarray]:
    """Baseline: the estimate from cKDTree neighbours (NaN unless every row was queried)."""
    Z = _scale_columns(X)
    n, p = Z.shape
    if p == 1:
        k = min(n - 1, max(8, 2 * p + 2) - 1)
        d2, idx = _tree_neighbours(Z, k, rows)
        nbr = idx[:, 0]  # nearest (ties need the rule of _neighbours; compared by distance)
        value = float(np.mean((y[rows] - y[nbr]) ** 2) / 2.0) if rows.size == n else np.nan
        return value, d2[:, :1]
    d2, idx = _tree_neighbours(Z, _GAMMA_NEIGHBOURS, rows)
    value = _gamma_from(d2, idx, y) if rows.size == n else np.nan
    return value, d2


def _ours_d2(X: np.ndarray, rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    Z = _scale_columns(X)
    if Z.shape[1] == 1:
        nbr = nearest_other(Z)[rows]
        d2 = ((Z[rows] - Z[nbr]) ** 2).sum(axis=1)[:, None]
        return d2, nbr[:, None]
    d2, idx = k_nearest(Z, _GAMMA_NEIGHBOURS)
    return d2[rows], idx[rows]


def _sweep_time(X: np.ndarray, y: np.ndarray) -> float:
    p = X.shape[1]
    start = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        cx.sweep(
            cx.FeatureLadder(range(1, p + 1)),
            X,
            y,
            plan=cx.CrossValidation(10),
            noise=0.25,
            random_state=0,
        )
    return time.perf_counter() - start


def _timed(fn, *args):
    start = time.perf_counter()
    value = fn(*args)
    return time.perf_counter() - start, value


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--tree-rows", type=int, default=400)
    parser.add_argument("--no-sweep", action="store_true")
    args = parser.parse_args(argv)
    if args.repeats < 1:
        parser.error(f"--repeats must be >= 1; got {args.repeats!r}")
    if args.tree_rows < 1:
        parser.error(f"--tree-rows must be >= 1; got {args.tree_rows!r}")

    print(
        f"nearest-neighbour noise estimate (medians of {args.repeats} repeats; seconds); "
        "tree = cKDTree.query, measured in the same run"
    )
    header = (
        f"{'case':<16}{'route':>9}{'ours':>8}{'tree':>9}{'tree/ours':>10}{'estimate':>9}"
        f"{'sweep':>7}{'est/sweep':>10}{'max rel d2':>11}{'lists differ':>13}{'rel est':>9}"
    )
    print(header)
    print("-" * len(header))
    for n, p in CASES:
        X, y = _data(n, p)
        full = p <= FULL_TREE_MAX_COLUMNS
        rows = np.arange(n) if full else np.linspace(0, n - 1, min(n, args.tree_rows)).astype(int)
        scale = n / rows.size
        estimate_noise(X[:500], y[:500], noise="neighbours")  # warm up
        ours_t, tree_t, est_t = [], [], []
        ours = tree = None
        for _ in range(args.repeats):
            t, _ = _timed(_ours_d2, X, rows)
            ours_t.append(t)
            t, tree = _timed(_tree_route, X, y, rows)
            tree_t.append(t * scale)
            t, ours = _timed(estimate_noise, X, y, "neighbours")
            est_t.append(t)
        ours_med, tree_med = statistics.median(ours_t), statistics.median(tree_t)
        est_med = statistics.median(est_t)
        d2_ours, _ = _ours_d2(X, rows)
        d2_tree = tree[1]
        rel_d2 = float(np.max(np.abs(d2_ours - d2_tree) / np.maximum(d2_tree, 1e-300)))
        differ = int(np.sum(np.any(np.abs(d2_ours - d2_tree) > 1e-9 * d2_tree, axis=1)))
        rel_est = abs(ours.value - tree[0]) / tree[0] if full else float("nan")
        sweep = float("nan") if args.no_sweep or p == 1 else _sweep_time(X, y)
        route = "tree" if p <= 6 else "products"
        label = f"{n:,} x {p}"
        tree_text = f"{tree_med:9.2f}" + ("" if full else "*")
        print(
            f"{label:<16}{route:>9}{ours_med:8.2f}{tree_text:>9}{tree_med / ours_med:10.1f}"
            f"{est_med:9.2f}{sweep:7.1f}{est_med / sweep:10.2f}{rel_d2:11.1e}"
            f"{f'{differ}/{rows.size}':>13}{rel_est:9.1e}"
        )
    print()
    print(
        f"* tree timed on {args.tree_rows:,} query rows spread over the data, scaled linearly to n "
        "(its estimate is then not computed: rel est n/a)"
    )
    print(
        "ours / tree: the neighbour search alone (our exact search on every row; cKDTree.query "
        "and the estimate from its neighbours). estimate: estimate_noise(noise='neighbours') end "
        "to end (scaling, search, estimate, effective df and SE)."
    )
    print(
        "sweep: FeatureLadder(range(1, p + 1)), CrossValidation(10), noise given (one run; "
        "none for p = 1). lists differ: rows whose neighbour distances differ by more than "
        "1e-9 relative."
    )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
