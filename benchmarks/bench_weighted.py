"""Speed of weighted sweeps on the exact engine against the generic path, in the same run.

Target (issue 14, item 3): a weighted least-squares sweep in the same speed class as the
unweighted exact sweep, far faster than the generic path (one scikit-learn
``LinearRegression().fit(..., sample_weight=w)`` per resample and capacity) it replaces.

Cases, on the synthetic curve of :func:`_common.data` with synthetic weights rising linearly
from 0.5 to 1.5 along the first predictor:

- polynomial degrees 0-10, ``Bootstrap(50)``, n = 2,000;
- polynomial degrees 0-10, ``CrossValidation(10)``, n = 2,000;
- ``FeatureLadder(range(1, 11))`` on ten synthetic predictors, ``Bootstrap(50)``, n = 2,000.

Each is timed, interleaved, ``--repeats`` times (medians reported), end to end through
``cx.sweep`` with one worker:

- ``weighted``: ``engine="exact"`` with ``sample_weight``;
- ``unweighted``: the same sweep without weights (the speed class to stay in);
- ``generic``: ``engine="generic"`` with ``sample_weight`` (the path weighted sweeps took before).

Accuracy: the largest relative difference between the weighted exact and the generic curves
(every column both tables have, relative to the largest test error where a value is near 0).

    python benchmarks/bench_weighted.py [--repeats 3]
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
import warnings
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
from _common import data

import complexity as cx

KINDS = ("weighted", "unweighted", "generic")


def _features(n: int, seed: int = 1) -> tuple[np.ndarray, np.ndarray]:
    """Ten synthetic predictors, y linear in the first six with shrinking effects plus noise."""
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 10))
    y = X[:, :6] @ (2.0 ** -np.arange(6)) + rng.normal(0.0, 0.5, n)
    return X, y


def _cases(n: int) -> list[tuple[str, cx.Ladder, np.ndarray, np.ndarray, Callable[[], object]]]:
    Xp, yp = data(n)
    Xf, yf = _features(n)
    poly = cx.PolynomialLadder(range(0, 11))
    return [
        ("degrees 0-10, Bootstrap(50)", poly, Xp, yp, lambda: cx.Bootstrap(50)),
        ("degrees 0-10, 10-fold", poly, Xp, yp, lambda: cx.CrossValidation(10)),
        (
            "FeatureLadder(1..10), Bootstrap(50)",
            cx.FeatureLadder(range(1, 11)),
            Xf,
            yf,
            lambda: cx.Bootstrap(50),
        ),
    ]


def _largest_difference(a: pd.DataFrame, b: pd.DataFrame) -> float:
    cols = [c for c in a.select_dtypes("number").columns if c in b.columns]
    scale = float(np.nanmax(np.abs(a["test_mse"].to_numpy(dtype=float)))) * 1e-6
    worst = 0.0
    for c in cols:
        x, y = a[c].to_numpy(dtype=float), b[c].to_numpy(dtype=float)
        ok = np.isfinite(x) & np.isfinite(y)
        if ok.any():
            rel = np.abs(x[ok] - y[ok]) / np.maximum(np.abs(y[ok]), scale)
            worst = max(worst, float(rel.max()))
    return worst


def _timed(
    kind: str, ladder: cx.Ladder, X: np.ndarray, y: np.ndarray, plan: object, w: np.ndarray
) -> tuple[float, cx.SweepResult]:
    """One end-to-end sweep of ``kind`` (see the module notes) and its wall time."""
    kwargs: dict[str, Any] = {"plan": plan, "random_state": 0}
    if kind != "unweighted":
        kwargs.update(sample_weight=w, engine="exact" if kind == "weighted" else "generic")
    start = time.perf_counter()
    out = cx.sweep(ladder, X, y, **kwargs)
    return time.perf_counter() - start, out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--n", type=int, default=2_000)
    args = parser.parse_args(argv)
    if args.repeats < 3:
        parser.error("--repeats must be at least 3 (medians of >= 3 runs)")
    rows = []
    for name, ladder, X, y, plan in _cases(args.n):
        w = 0.5 + (X[:, 0] - X[:, 0].min()) / np.ptp(X[:, 0])  # synthetic weights in [0.5, 1.5]
        times: dict[str, list[float]] = {k: [] for k in KINDS}
        results: dict[str, cx.SweepResult] = {}
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            for _ in range(args.repeats):
                for kind in KINDS:  # interleaved
                    t, results[kind] = _timed(kind, ladder, X, y, plan(), w)
                    times[kind].append(t)
        med = {k: statistics.median(v) for k, v in times.items()}
        rows.append(
            {
                "case": name,
                "weighted s": med["weighted"],
                "unweighted s": med["unweighted"],
                "generic s": med["generic"],
                "weighted/unweighted": med["weighted"] / med["unweighted"],
                "generic/weighted": med["generic"] / med["weighted"],
                "max rel diff vs generic": _largest_difference(
                    results["weighted"].curves, results["generic"].curves
                ),
            }
        )
    table = pd.DataFrame(rows).set_index("case")
    print(f"n = {args.n}, median of {args.repeats} interleaved runs, one worker")
    with pd.option_context("display.width", 200, "display.float_format", "{:.3g}".format):
        print(table.to_string())
    return 0


if __name__ == "__main__":
    sys.exit(main())
