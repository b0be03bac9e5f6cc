"""Speed of the closed-form criteria of the exact engine against brute-force leave-one-out refits.

One case (target from the engine's specification):

==================================================  ==========================================
case                                                target
==================================================  ==========================================
n = 5,000, degrees 0-12, LOOCV + GCV + criteria     >= 1,000x faster than brute-force
                                                    leave-one-out refits on the same data
==================================================  ==========================================

Timed, interleaved, ``--repeats`` times each (medians reported):

- ``closed forms``: ``complexity.engine.linear.fit_full`` on a ``PolynomialLadder(range(0, 13))``
  problem, end to end: one QR of the stable polynomial basis gives every degree's residuals and
  hat-matrix diagonal, then ``criteria_table`` gives leave-one-out CV (PRESS / n from
  ``e_i / (1 - h_ii)``), GCV, AIC, AICc, BIC and Mallows' Cp for every degree, no resampling.
  ``fit_full`` also builds the diagnostics table, so this is what a user pays for the criteria
  (the per-degree coefficient tables in the user's units are made only when first asked for).
  ``fit_full`` limits BLAS to one thread itself; nothing here changes thread settings;
- ``QR + criteria``: only the nested least-squares fit and ``criteria_table`` (no diagnostics, no
  coefficient tables), through the same functions ``fit_full`` calls;
- ``sweep`` (context only, no target): ``cx.sweep(..., plan=Bootstrap(2), engine="exact")`` end
  to end, the smallest plan a sweep accepts; its result carries the same criteria columns;
- ``brute force``: for each left-out point i and each degree d, the careful scikit-learn pipeline
  ``Pipeline([StandardScaler(), PolynomialFeatures(d), LinearRegression()])`` refitted on the
  other n - 1 rows and used to predict row i; LOOCV(d) is the mean of the squared leave-one-out
  residuals. All n points would be 65,000 fits, so it is timed on ``--brute-points`` left-out
  points spread evenly over the (sorted) data and scaled up linearly to n (the table says so).
  BLAS threading is left at its defaults, as for the baseline of ``bench_exact.py``.

Accuracy, over the degrees where the brute force's own least-squares problem (centred powers of
the scaled x) is well conditioned (2-norm condition number < 1e5, the rule of
``bench_exact.py``): the largest difference between the brute-force leave-one-out residuals
``y_i - prediction_i`` and the closed-form ones ``e_i / (1 - h_ii)`` at the timed points (relative
to the largest brute-force residual), and the largest relative difference between the two LOOCV
values restricted to those points (mean of their squared leave-one-out residuals). The
``QR + criteria`` row is also checked to reproduce ``fit_full``'s criteria.

    python benchmarks/bench_closed_forms.py [--repeats 3] [--brute-points 100]
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

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
from _common import data, well_conditioned

import complexity as cx
from complexity.criteria import criteria_table
from complexity.engine import Problem
from complexity.engine import linear as exact
from complexity.engine._dispatch import single_blas
from complexity.lstsq.nested import nested_least_squares

N = 5_000
DEGREE = 12
SPEED_TARGET = 1_000.0
CRITERIA = ["loocv", "gcv", "aic", "aicc", "bic", "cp"]


def _problem(X: np.ndarray, y: np.ndarray, degree: int) -> Problem:
    ladder = cx.PolynomialLadder(range(0, degree + 1))
    # fit_full never draws a resample; a Problem needs a plan, Bootstrap(2) is the smallest
    plan = cx.Bootstrap(2)
    return Problem(ladder, ladder.build(X), X, y, X, y, plan, np.random.SeedSequence(0), X)


def _closed_forms(problem: Problem):
    return exact.fit_full(problem)


def _criteria_only(problem: Problem):
    """The nested least-squares fit and the criteria table alone, as ``fit_full`` computes them."""
    design = problem.ladder.nested_design(problem.X)
    with single_blas():  # as fit_full does
        fit = nested_least_squares(
            design.transform(problem.X), problem.y, n_columns_per_capacity=design.n_columns
        )
        table = criteria_table(fit.fitted_residuals, fit.leverage, fit.rank, rss=fit.rss)
    return fit, table


def _sweep(X: np.ndarray, y: np.ndarray, degree: int):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        return cx.sweep(
            cx.PolynomialLadder(range(0, degree + 1)),
            X,
            y,
            plan=cx.Bootstrap(2),
            random_state=0,
            engine="exact",
        )


def _points(n: int, k: int) -> np.ndarray:
    """``k`` left-out rows spread evenly over the data (deterministic)."""
    return np.unique(np.linspace(0, n - 1, min(k, n)).round().astype(np.intp))


def _brute(X: np.ndarray, y: np.ndarray, degree: int, points: np.ndarray) -> np.ndarray:
    """Leave-one-out residuals ``y_i - prediction_i``, shape (len(points), degree + 1)."""
    out = np.empty((points.size, degree + 1))
    keep = np.ones(len(y), dtype=bool)
    for j, i in enumerate(points):
        keep[i] = False
        for d in range(degree + 1):
            model = Pipeline(
                [
                    ("scale", StandardScaler()),
                    ("powers", PolynomialFeatures(d)),
                    ("ls", LinearRegression()),
                ]
            ).fit(X[keep], y[keep])
            out[j, d] = y[i] - model.predict(X[i : i + 1])[0]
        keep[i] = True
    return out


def _timed(fn, *args):
    start = time.perf_counter()
    value = fn(*args)
    return time.perf_counter() - start, value


def _accuracy(fit, points: np.ndarray, brute: np.ndarray, degrees: list[int]):
    """Residual and subset-LOOCV differences between brute force and closed forms."""
    closed = (fit.fitted_residuals[:, points] / (1.0 - fit.leverage[:, points])).T  # (k, C)
    b, c = brute[:, degrees], closed[:, degrees]
    res_diff = float(np.max(np.abs(c - b)) / np.max(np.abs(b)))
    loocv_b, loocv_c = np.mean(b**2, axis=0), np.mean(c**2, axis=0)
    loocv_diff = np.abs(loocv_c - loocv_b) / loocv_b
    return res_diff, loocv_diff


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--brute-points", type=int, default=100)
    args = parser.parse_args(argv)
    if args.repeats < 1:
        parser.error(f"--repeats must be >= 1; got {args.repeats!r}")
    if args.brute_points < 1:
        parser.error(f"--brute-points must be >= 1; got {args.brute_points!r}")

    X, y = data(N)
    problem = _problem(X, y, DEGREE)
    points = _points(N, args.brute_points)
    scale = N / points.size
    # warm up imports and caches
    _closed_forms(problem)
    _criteria_only(problem)
    _sweep(X, y, DEGREE)
    _brute(X, y, DEGREE, points[:1])

    times = {"closed": [], "criteria": [], "sweep": [], "brute": []}
    full = fit = table = brute = None
    for _ in range(args.repeats):
        t, full = _timed(_closed_forms, problem)
        times["closed"].append(t)
        t, (fit, table) = _timed(_criteria_only, problem)
        times["criteria"].append(t)
        t, _ = _timed(_sweep, X, y, DEGREE)
        times["sweep"].append(t)
        t, brute = _timed(_brute, X, y, DEGREE, points)
        times["brute"].append(t * scale)
    med = {k: statistics.median(v) for k, v in times.items()}

    good = well_conditioned(X, DEGREE)
    res_diff, loocv_diff = _accuracy(fit, points, brute, good)
    same = np.array_equal(full.criteria[CRITERIA].to_numpy(), table[CRITERIA].to_numpy())
    n_fits = N * (DEGREE + 1)

    print(
        f"closed-form criteria benchmark: n={N:,}, degrees 0-{DEGREE} "
        f"(medians of {args.repeats} repeats; times in seconds)"
    )
    header = f"{'timed':<44}{'median':>10}{'brute/this':>12}"
    print(header)
    print("-" * len(header))
    rows = [
        ("closed forms: fit_full (end to end)", med["closed"]),
        ("  QR + criteria_table only", med["criteria"]),
        ("sweep, Bootstrap(2) (context)", med["sweep"]),
    ]
    for label, value in rows:
        print(f"{label:<44}{value:10.4f}{med['brute'] / value:12.0f}")
    print(
        f"{f'brute force: {n_fits:,} leave-one-out refits':<44}{med['brute']:10.1f}{'':12}"
        f"   (timed on {points.size} of {N:,} left-out points, scaled x{scale:g})"
    )
    print()
    print("targets and accuracy")
    speed = med["brute"] / med["closed"]
    verdict = "met" if speed >= SPEED_TARGET else "NOT met"
    print(
        f"  n={N:,} deg 0-{DEGREE}: speed-up of fit_full {speed:.0f} "
        f"(target >= {SPEED_TARGET:g}: {verdict})"
    )
    print(
        f"    max relative difference vs brute force at degrees {good[0]}-{good[-1]} "
        f"(brute-force problem cond < 1e5), {points.size} left-out points: "
        f"leave-one-out residuals {res_diff:.1e}, LOOCV over those points {loocv_diff.max():.1e}"
    )
    skipped = [d for d in range(DEGREE + 1) if d not in good]
    if skipped:
        res_rest, loocv_rest = _accuracy(fit, points, brute, skipped)
        print(
            f"    for information, degrees {skipped} (brute-force problem cond >= 1e5, so the "
            f"brute force is the less accurate side): residuals {res_rest:.1e}, "
            f"LOOCV over those points {loocv_rest.max():.1e}"
        )
    print(
        "    QR + criteria_table reproduces fit_full's "
        f"{', '.join(CRITERIA)}: {'exactly' if same else 'NO'}"
    )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
