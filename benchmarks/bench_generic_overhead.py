"""Overhead of the generic engine against a bare loop of the same fits, and its parallel speed-up.

The estimator takes about 10 ms per fit (by default it sleeps 10 ms, then fits a small polynomial,
so the measurement does not depend on how busy the shared CPUs are; ``--kind cpu`` uses a real
gradient-boosting regressor sized to roughly 10 ms instead). Three configurations are timed,
interleaved, ``--repeats`` times each:

- bare loop: for every resample of the same bootstrap plan and every capacity, clone, fit on the
  training rows, predict the training and out-of-bag rows; plus one full-data fit and prediction
  per capacity, as the sweep does;
- ``cx.sweep(..., n_jobs=1)``: the generic engine, including validation, noise estimate,
  accumulation, decomposition and rules;
- ``cx.sweep(..., n_jobs=2)``: the same with two loky workers (warmed up before timing).

Targets: sweep(n_jobs=1) <= 1.10 x the bare loop; sweep(n_jobs=2) >= 1.7 x faster than n_jobs=1.

    python benchmarks/bench_generic_overhead.py [--n-resamples 30] [--repeats 5] [--kind sleep]
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
import warnings
from pathlib import Path

import numpy as np
from sklearn.base import BaseEstimator, RegressorMixin, clone
from sklearn.ensemble import GradientBoostingRegressor

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
import complexity as cx

OVERHEAD_TARGET = 1.10
SPEEDUP_TARGET = 1.7


class SleepyPolynomial(RegressorMixin, BaseEstimator):
    """A least-squares polynomial in x that first sleeps ``delay`` seconds (a stand-in for a slow fit)."""

    def __init__(self, degree: int = 1, delay: float = 0.010) -> None:
        self.degree = degree
        self.delay = delay

    def fit(self, X, y):
        time.sleep(self.delay)
        self.coef_ = np.polynomial.Polynomial.fit(np.asarray(X)[:, 0], y, self.degree)
        return self

    def predict(self, X):
        return self.coef_(np.asarray(X)[:, 0])


def _ladder(kind: str) -> cx.ParamLadder:
    if kind == "sleep":
        return cx.ParamLadder(SleepyPolynomial(), "degree", [0, 1, 2, 3, 4])
    # about 10 ms per fit on 51 rows on the reference machine (2 cores)
    base = GradientBoostingRegressor(n_estimators=12, random_state=0)
    return cx.ParamLadder(base, "max_depth", [1, 2, 3, 4, 5])


def bare_loop(ladder: cx.ParamLadder, X, y, plan: cx.Bootstrap, seed: int) -> float:
    start = time.perf_counter()
    models = ladder.build(X)
    for r in plan.resamples(len(y), np.random.SeedSequence(seed), X, y):
        for model in models:
            est = clone(model).fit(X[r.train], y[r.train])
            est.predict(X[r.train])
            est.predict(X[r.test])
    for model in models:  # the sweep's full-data fit of every capacity
        clone(model).fit(X, y).predict(X)
    return time.perf_counter() - start


def with_sweep(ladder: cx.ParamLadder, X, y, plan: cx.Bootstrap, seed: int, n_jobs: int) -> float:
    start = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        cx.sweep(ladder, X, y, plan=plan, random_state=seed, n_jobs=n_jobs, engine="generic")
    return time.perf_counter() - start


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n-resamples", type=int, default=30)
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--kind", choices=["sleep", "cpu"], default="sleep")
    args = parser.parse_args(argv)

    X, y = (np.asarray(a, dtype=np.float64) for a in cx.datasets.pressure_sensor())
    X = X.reshape(len(y), -1)
    ladder = _ladder(args.kind)
    plan = cx.Bootstrap(args.n_resamples)
    n_fits = args.n_resamples * len(ladder.capacities) + len(ladder.capacities)

    # one fit's time, and a warm-up of every path (starts the loky workers)
    t0 = time.perf_counter()
    for _ in range(10):
        clone(ladder.build(X)[2]).fit(X, y)
    one_fit_ms = (time.perf_counter() - t0) / 10 * 1e3
    with_sweep(ladder, X, y, cx.Bootstrap(8), 0, 2)
    with_sweep(ladder, X, y, cx.Bootstrap(2), 0, 1)

    times: dict[str, list[float]] = {"bare loop": [], "sweep n_jobs=1": [], "sweep n_jobs=2": []}
    for rep in range(args.repeats):  # interleaved, so drifting machine load hits all three
        times["bare loop"].append(bare_loop(ladder, X, y, plan, rep))
        times["sweep n_jobs=1"].append(with_sweep(ladder, X, y, plan, rep, 1))
        times["sweep n_jobs=2"].append(with_sweep(ladder, X, y, plan, rep, 2))
    med = {k: statistics.median(v) for k, v in times.items()}

    print(
        f"{args.kind} estimator, {one_fit_ms:.1f} ms per fit; bootstrap {args.n_resamples} x "
        f"{len(ladder.capacities)} capacities = {n_fits} fits; median of {args.repeats}"
    )
    print(f"{'configuration':<18} {'median (s)':>11} {'min (s)':>9} {'ms / fit':>9} {'vs bare':>8}")
    for name, values in times.items():
        print(
            f"{name:<18} {med[name]:>11.3f} {min(values):>9.3f} "
            f"{med[name] / n_fits * 1e3:>9.2f} {med[name] / med['bare loop']:>8.3f}"
        )
    overhead = med["sweep n_jobs=1"] / med["bare loop"]
    speedup = med["sweep n_jobs=1"] / med["sweep n_jobs=2"]
    ok_overhead, ok_speedup = overhead <= OVERHEAD_TARGET, speedup >= SPEEDUP_TARGET
    print(
        f"overhead  sweep(n_jobs=1) / bare loop = {overhead:.3f}  "
        f"(target <= {OVERHEAD_TARGET:.2f}: {'met' if ok_overhead else 'NOT met'})"
    )
    print(
        f"speed-up  sweep(n_jobs=1) / sweep(n_jobs=2) = {speedup:.3f}  "
        f"(target >= {SPEEDUP_TARGET:.1f}: {'met' if ok_speedup else 'NOT met'})"
    )
    return 0 if ok_overhead and ok_speedup else 1


if __name__ == "__main__":
    raise SystemExit(main())
