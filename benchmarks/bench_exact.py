"""Speed of the exact least-squares engine against a careful scikit-learn loop and a floor.

Cases and targets (issue 14, item 6: the floor restated):

=====================================================  =============================================
case                                                   target
=====================================================  =============================================
n = 20,000, degrees 0-15, Bootstrap(200), OOB curves    >= 50x faster than the baseline on one
                                                       worker; sweep <= 3x the floor
n = 40, degrees 0-10, Bootstrap(2,000)                 >= 500x faster than the baseline; < 0.3 s
n = 1,000,000, degrees 0-15, Bootstrap(200)            sweep <= 3x the floor (``--large`` only)
=====================================================  =============================================

Timed, interleaved, ``--repeats`` times each (medians reported):

- ``sweep``: ``cx.sweep(PolynomialLadder, X, y, plan=Bootstrap(B), engine="exact")`` end to end
  (validation, noise estimate, full fit and criteria, drawing every resample, fitting,
  accumulation, decomposition, rules), one worker (the default ``n_jobs``);
- ``2 jobs``: the same sweep with ``n_jobs=2`` (the machine's two cores; the baseline's BLAS uses
  both cores too). Results are bit-identical to the one-worker sweep (tested);
- ``engine``: the exact engine alone on the same resamples: ``fit_full`` plus ``run_tallies``
  (every capacity of every resample, folded into per-point tallies, as the sweep runs it);
  "engine speed-up" is baseline / engine, "speed-up" is baseline / sweep;
- ``baseline``: a careful scikit-learn loop on the same resamples: for every resample and degree,
  ``Pipeline([StandardScaler(), PolynomialFeatures(d), LinearRegression()])`` refitted on the
  training rows and evaluated out of bag. At the large sizes it is timed on the first
  ``--baseline-resamples`` resamples and scaled up linearly (the table says so);
- ``floor``: the least work any count-based method does, single-threaded like the engine, in two
  timed parts: ``gram``, the matrix product that forms every Gram matrix of the run (bootstrap
  counts (B x n) times the products of the orthonormal basis columns, plus Q^T y and y^2; in row
  blocks at large n, as the engine forms it), and ``predict``, one pass that forms every
  out-of-bag prediction of every resample at every capacity (the out-of-bag rows of the basis
  times each resample's coefficients; no accumulation). The coefficients it needs are computed
  before the clock starts.

``sweep/floor`` is then what the solves, the per-point tallies (count, mean and spread of every
out-of-bag residual), the full fit, the noise estimate and the decomposition cost on top of the
unavoidable products.

Accuracy: the largest relative difference between the baseline's and the engine's out-of-bag
residuals, and between the out-of-bag error curves computed from them, over the degrees where the
baseline's own least-squares problem (centred powers of the scaled x) is well conditioned (2-norm
condition number < 1e5). Beyond that the baseline itself is not accurate: ``LinearRegression``
solves with ``scipy.linalg.lstsq(..., cond=tol)``, ``tol=1e-6``, so it truncates singular values
once the condition number passes 1e6 (degree 15 here).

    python benchmarks/bench_exact.py [--repeats 3] [--baseline-resamples 20]
    python benchmarks/bench_exact.py --large [--large-repeats 1]   # adds n = 1,000,000

"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
import warnings
from pathlib import Path

import numpy as np
from sklearn.linear_model import LinearRegression
from sklearn.pipeline import Pipeline
from sklearn.preprocessing import PolynomialFeatures, StandardScaler
from threadpoolctl import threadpool_limits

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
from _common import data, well_conditioned

import complexity as cx
from complexity.engine import Problem, _batched
from complexity.engine import linear as exact
from complexity.engine._dispatch import group_by_index

CASES = (
    # name, n, top degree, resamples, target speed-up, floor ratio target, seconds target
    ("n=20,000 deg 0-15 B=200", 20_000, 15, 200, 50.0, 3.0, None),
    ("n=40 deg 0-10 B=2,000", 40, 10, 2_000, 500.0, None, 0.3),
)
LARGE = ("n=1,000,000 deg 0-15 B=200", 1_000_000, 15, 200, 50.0, 3.0, None)


def _problem(X, y, degree, B, seed=0):
    ladder = cx.PolynomialLadder(range(0, degree + 1))
    plan = cx.Bootstrap(B)
    root = np.random.SeedSequence(seed)
    problem = Problem(ladder, ladder.build(X), X, y, X, y, plan, root, X)
    return problem, plan.resamples(len(y), root, X, y)


def _baseline(X, y, degree, resamples):
    """Careful scikit-learn loop: OOB residuals per resample, every degree refitted."""
    out = []
    for r in resamples:
        res = np.empty((r.test.size, degree + 1))
        for d in range(degree + 1):
            model = Pipeline(
                [
                    ("scale", StandardScaler()),
                    ("powers", PolynomialFeatures(d)),
                    ("ls", LinearRegression()),
                ]
            ).fit(X[r.train], y[r.train])
            res[:, d] = model.predict(X[r.test]) - y[r.test]
        out.append(res)
    return out


def _floor(problem, resamples):
    """Seconds for the Gram products and for one pass forming every out-of-bag prediction.

    Chunk by chunk as the engine goes (the counts of all resamples at once would not fit in
    memory at n = 1,000,000); the coefficients are computed off the clock.
    """
    gram = predict = 0.0
    with threadpool_limits(limits=1, user_api="blas"):
        ref, shared = exact._prepare(problem)
        n, Q0t = problem.X.shape[0], shared["Q0_target"]
        for chunk in group_by_index(resamples, ref.chunk):
            counts = np.zeros((len(chunk), n))
            for i, r in enumerate(chunk):
                counts[i] = np.bincount(r.train, minlength=n)
            start = time.perf_counter()
            _batched.moments(counts, ref.Q0, shared["yc"], shared)
            gram += time.perf_counter() - start
            coef = exact._chunk_fits(problem, ref, shared, chunk).A1
            start = time.perf_counter()
            for r in chunk:
                np.take(Q0t, r.test, axis=0) @ coef[r.index % ref.chunk]
            predict += time.perf_counter() - start
    return gram, predict


def _engine(problem, resamples):
    exact.fit_full(problem)
    return list(exact.run_tallies(problem, resamples))


def _outcomes(problem, resamples):
    """Per-resample out-of-bag residuals (for the accuracy check; not timed)."""
    return list(exact.run(problem, resamples))


def _sweep(X, y, degree, B, n_jobs=None):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        return cx.sweep(
            cx.PolynomialLadder(range(0, degree + 1)),
            X,
            y,
            plan=cx.Bootstrap(B),
            random_state=0,
            engine="exact",
            n_jobs=n_jobs,
        )


def _timed(fn, *args):
    start = time.perf_counter()
    value = fn(*args)
    return time.perf_counter() - start, value


def _accuracy(X, degree, resamples, base, ours):
    """Largest relative differences over degrees where the baseline design is well conditioned."""
    good = well_conditioned(X, degree)
    res_diff, err_b, err_o = 0.0, [], []
    for b, o in zip(base, ours):
        ob = o.residuals[:, good]
        bb = b[:, good]
        scale = np.max(np.abs(bb)) if bb.size else 1.0
        res_diff = max(res_diff, float(np.max(np.abs(ob - bb)) / scale) if bb.size else 0.0)
        err_b.append(np.mean(bb**2, axis=0))
        err_o.append(np.mean(ob**2, axis=0))
    curve_b, curve_o = np.mean(err_b, axis=0), np.mean(err_o, axis=0)
    curve_diff = float(np.max(np.abs(curve_o - curve_b) / curve_b))
    return good, res_diff, curve_diff


def _measure(case, repeats, baseline_resamples):
    name, n, degree, B, speed_target, floor_target, seconds_target = case
    X, y = data(n)
    problem, resamples = _problem(X, y, degree, B)
    sub = resamples[: min(B, baseline_resamples)]
    scale = B / len(sub)
    _sweep(X, y, degree, min(B, 20))  # warm up imports and caches
    _sweep(X, y, degree, min(B, 20), 2)  # start the worker threads' machinery once
    keys = ("sweep", "2 jobs", "engine", "baseline", "gram", "predict")
    times: dict[str, list[float]] = {k: [] for k in keys}
    base = None
    for _ in range(repeats):
        t, _ = _timed(_sweep, X, y, degree, B)
        times["sweep"].append(t)
        t, _ = _timed(_sweep, X, y, degree, B, 2)
        times["2 jobs"].append(t)
        t, _ = _timed(_engine, problem, resamples)
        times["engine"].append(t)
        gram, predict = _floor(problem, resamples)
        times["gram"].append(gram)
        times["predict"].append(predict)
        t, base = _timed(_baseline, X, y, degree, sub)
        times["baseline"].append(t * scale)
    med = {k: statistics.median(v) for k, v in times.items()}
    # the floor of each repeat is its two parts measured together
    med["floor"] = statistics.median(g + p for g, p in zip(times["gram"], times["predict"]))
    ours = _outcomes(problem, sub)
    good, res_diff, curve_diff = _accuracy(X, degree, sub, base, ours)
    return (
        name,
        med,
        scale,
        speed_target,
        floor_target,
        seconds_target,
        good,
        res_diff,
        curve_diff,
    )


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--baseline-resamples", type=int, default=20)
    parser.add_argument("--large", action="store_true", help="add the n = 1,000,000 case")
    parser.add_argument("--large-repeats", type=int, default=1)
    args = parser.parse_args(argv)

    rows = [_measure(case, args.repeats, args.baseline_resamples) for case in CASES]
    if args.large:
        rows.append(_measure(LARGE, args.large_repeats, 2))

    print(f"exact engine benchmark (medians of {args.repeats} repeats; times in seconds)")
    if args.large:
        print(f"  (n = 1,000,000: {args.large_repeats} repeat(s), baseline on 2 resamples)")
    header = (
        f"{'case':<28}{'sweep':>8}{'2 jobs':>8}{'engine':>8}{'gram':>8}{'predict':>8}"
        f"{'floor':>8}{'baseline':>10}{'speed-up':>10}{'2 jobs':>8}{'engine':>8}"
        f"{'sweep/floor':>13}{'engine/floor':>14}"
    )
    print(f"{'':<86}{'---------- speed-up ----------':>30}")
    print(header)
    print("-" * len(header))
    for name, med, scale, *_ in rows:
        speed = med["baseline"] / med["sweep"]
        print(
            f"{name:<28}{med['sweep']:8.3f}{med['2 jobs']:8.3f}{med['engine']:8.3f}"
            f"{med['gram']:8.4f}{med['predict']:8.4f}{med['floor']:8.4f}"
            f"{med['baseline']:10.2f}{speed:10.0f}"
            f"{med['baseline'] / med['2 jobs']:8.0f}{med['baseline'] / med['engine']:8.0f}"
            f"{med['sweep'] / med['floor']:13.1f}{med['engine'] / med['floor']:14.1f}"
            + ("" if scale == 1 else f"   (baseline timed on 1/{scale:g} of the resamples, scaled)")
        )
    print()
    print("targets and accuracy")
    for name, med, _, speed_target, floor_target, seconds_target, good, rd, cd in rows:
        speed = med["baseline"] / med["sweep"]
        checks = [
            f"speed-up {speed:.0f} (target >= {speed_target:g}; with 2 jobs "
            f"{med['baseline'] / med['2 jobs']:.0f})"
        ]
        if floor_target is not None:
            checks.append(
                f"sweep/floor {med['sweep'] / med['floor']:.1f} (target <= {floor_target:g})"
            )
        if seconds_target is not None:
            checks.append(f"sweep {med['sweep']:.3f} s (target < {seconds_target:g} s)")
        print(f"  {name}: " + "; ".join(checks))
        print(
            f"    max relative difference vs baseline at degrees {good[0]}-{good[-1]} "
            f"(baseline problem cond < 1e5): OOB residuals {rd:.1e}, OOB error curve {cd:.1e}"
        )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
