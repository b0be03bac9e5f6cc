"""Ranked feature ladders: the ranked exact engine against the clone-and-fit engine, same run.

Synthetic data (marked synthetic): n rows, p correlated Gaussian predictors, y linear in the
first half of them plus N(0, 1) noise. ``FeatureLadder(range(1, p + 1), order="correlation")``
under ``Bootstrap(B)``; each engine timed ``repeats`` times (median), with the noise estimate
given (``noise=1.0``) so both runs time the sweep itself. The last column is the largest
relative difference of the test-error curve between the engines.

Run: ``python benchmarks/bench_ranked.py [--n 20000] [--p 9] [--resamples 20] [--repeats 3]``
"""

from __future__ import annotations

import argparse
import statistics
import time

import numpy as np

import complexity as cx


def _data(n: int, p: int, seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    base = rng.standard_normal((n, p))
    X = base + 0.5 * base[:, [0]]  # correlated columns
    beta = np.where(np.arange(p) < p // 2, 1.0 / (1 + np.arange(p)), 0.0)
    return X, X @ beta + rng.standard_normal(n)


def _time(engine: str, X: np.ndarray, y: np.ndarray, p: int, B: int, repeats: int):
    times, result = [], None
    for _ in range(repeats):
        start = time.perf_counter()
        result = cx.sweep(
            cx.FeatureLadder(range(1, p + 1), order="correlation"),
            X,
            y,
            plan=cx.Bootstrap(B),
            engine=engine,
            noise=1.0,
            random_state=0,
            n_jobs=1,
        )
        times.append(time.perf_counter() - start)
    return statistics.median(times), result


def main() -> None:
    """Print the table."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=20_000)
    ap.add_argument("--p", type=int, default=9)
    ap.add_argument("--resamples", type=int, default=20)
    ap.add_argument("--repeats", type=int, default=3)
    a = ap.parse_args()
    X, y = _data(a.n, a.p)
    t_fast, fast = _time("exact", X, y, a.p, a.resamples, a.repeats)
    t_slow, slow = _time("generic", X, y, a.p, a.resamples, a.repeats)
    f = fast.curves["test_mse"].to_numpy()
    s = slow.curves["test_mse"].to_numpy()
    diff = float(np.max(np.abs(f - s) / np.abs(s)))
    print(f"ranked FeatureLadder, n={a.n}, p={a.p}, Bootstrap({a.resamples}), n_jobs=1")
    print("| engine | median s | ratio generic/this | max rel diff test_mse |")
    print("|---|---|---|---|")
    print(f"| {fast.metadata['engine']} | {t_fast:.2f} | {t_slow / t_fast:.1f} | {diff:.1e} |")
    print(f"| {slow.metadata['engine']} | {t_slow:.2f} | 1.0 | 0 |")


if __name__ == "__main__":
    main()
