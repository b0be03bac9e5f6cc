"""Ridge ladders: the exact-ridge engine against the generic path, ``validation_curve`` and RidgeCV.

Case (issue 14, item 2): ``ParamLadder(Ridge(), "alpha", 50 values)``, 10-fold, n = 5,000 rows x
50 predictors (synthetic: standard normal predictors, half of them with effect, Gaussian noise).
Timed, interleaved, ``--repeats`` times each (median reported):

- ``cx.sweep`` with the ridge engine (``engine="auto"`` picks "exact-ridge");
- ``cx.sweep(..., engine="generic")``: one scikit-learn ``Ridge`` fit per fold and alpha;
- scikit-learn ``validation_curve`` on the same folds (``KFold(10)``), the reference for the
  test-error curve;
- the leave-one-out answer for every alpha: this package's ridge ``fit_full`` (leverages,
  PRESS, GCV) against ``RidgeCV(alphas=...)``'s efficient leave-one-out fit.

Both sweeps are given ``noise=`` a float, so the timing is of the fits, not of the noise
estimate (a separate item of the same issue). Targets: the ridge sweep >= 30x faster than the
generic one; its leave-one-out answer within 3x of RidgeCV's time.

    python benchmarks/bench_ridge.py [--repeats 3] [--n 5000] [--p 50]
"""

from __future__ import annotations

import argparse
import inspect
import statistics
import sys
import time
import warnings
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
from sklearn.linear_model import Ridge, RidgeCV
from sklearn.model_selection import KFold, validation_curve

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
import complexity as cx
from complexity.engine import Problem
from complexity.engine import ridge as ridge_engine

SPEED_TARGET = 30.0  # generic / exact-ridge
LOO_TARGET = 3.0  # ours / RidgeCV
NOISE = 1.0  # the synthetic data's noise variance, passed to both sweeps


def data(n: int, p: int, seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    """Synthetic: X standard normal, y = X beta + N(0, 1), beta_j = 1/j for half of the columns."""
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p))
    beta = np.where(np.arange(p) % 2 == 0, 1.0 / (1.0 + np.arange(p)), 0.0)
    return X, X @ beta + rng.normal(0.0, np.sqrt(NOISE), n)


def _timed(fn: Callable[[], Any]) -> tuple[float, Any]:
    start = time.perf_counter()
    value = fn()
    return time.perf_counter() - start, value


def _sweep(X: np.ndarray, y: np.ndarray, alphas: np.ndarray, engine: str) -> cx.SweepResult:
    ladder = cx.ParamLadder(Ridge(), "alpha", list(alphas))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        return cx.sweep(ladder, X, y, plan=KFold(10), noise=NOISE, engine=engine, random_state=0)


def _validation_curve(X: np.ndarray, y: np.ndarray, alphas: np.ndarray) -> np.ndarray:
    _, test = validation_curve(
        Ridge(), X, y, param_name="alpha", param_range=alphas, cv=KFold(10),
        scoring="neg_mean_squared_error",
    )  # fmt: skip
    return np.asarray(-test.mean(axis=1))


def _ours_loo(X: np.ndarray, y: np.ndarray, alphas: np.ndarray) -> np.ndarray:
    ladder = cx.ParamLadder(Ridge(), "alpha", list(alphas))
    problem = Problem(
        ladder, ladder.build(X), X, y, X, y, cx.Bootstrap(2), np.random.SeedSequence(0), X
    )
    return np.asarray(ridge_engine.fit_full(problem).criteria["loocv"].to_numpy())


def _ridgecv_loo(X: np.ndarray, y: np.ndarray, alphas: np.ndarray) -> np.ndarray:
    keyword = (
        "store_cv_results"
        if "store_cv_results" in inspect.signature(RidgeCV).parameters
        else "store_cv_values"
    )
    cv = RidgeCV(alphas=alphas, **{keyword: True}).fit(X, y)
    values = getattr(cv, "cv_results_", None)
    return np.asarray(values if values is not None else cv.cv_values_).mean(axis=0)


def _rel(a: np.ndarray, b: np.ndarray) -> float:
    return float(np.max(np.abs(a - b) / np.abs(b)))


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--n", type=int, default=5000)
    parser.add_argument("--p", type=int, default=50)
    args = parser.parse_args(argv)
    X, y = data(args.n, args.p)
    alphas = np.logspace(-3, 4, 50)

    cases: dict[str, Callable[[], Any]] = {
        "sweep exact-ridge": lambda: _sweep(X, y, alphas, "auto"),
        "sweep generic": lambda: _sweep(X, y, alphas, "generic"),
        "validation_curve": lambda: _validation_curve(X, y, alphas),
        "LOO ours (fit_full)": lambda: _ours_loo(X, y, alphas),
        "LOO RidgeCV": lambda: _ridgecv_loo(X, y, alphas),
    }
    for fn in cases.values():  # warm-up: imports, caches
        fn()
    times: dict[str, list[float]] = {k: [] for k in cases}
    values: dict[str, Any] = {}
    for _ in range(args.repeats):  # interleaved, so drifting machine load hits every case
        for name, fn in cases.items():
            t, values[name] = _timed(fn)
            times[name].append(t)
    med = {k: statistics.median(v) for k, v in times.items()}

    ours, generic = values["sweep exact-ridge"], values["sweep generic"]
    assert ours.metadata["engine"] == "exact-ridge" and generic.metadata["engine"] == "generic"
    cols = [c for c in generic.curves.columns if generic.curves[c].dtype.kind == "f"]
    curve_diff = max(
        _rel(ours.curves[c].to_numpy(), generic.curves[c].to_numpy())
        for c in cols
        if np.all(np.abs(generic.curves[c].to_numpy()) > 0)
    )
    vc_diff = _rel(ours.curves["test_mse"].to_numpy(), values["validation_curve"])
    loo_diff = _rel(values["LOO ours (fit_full)"], values["LOO RidgeCV"])
    reference = {
        "sweep exact-ridge": ("-", ""),
        "sweep generic": ("sweep exact-ridge", f"{curve_diff:.1e} (all curves)"),
        "validation_curve": ("sweep exact-ridge", f"{vc_diff:.1e} (test_mse)"),
        "LOO ours (fit_full)": ("-", ""),
        "LOO RidgeCV": ("LOO ours (fit_full)", f"{loo_diff:.1e} (LOO MSE)"),
    }
    print(
        f"ParamLadder(Ridge(), 'alpha', {alphas.size} values), KFold(10), n = {args.n} x {args.p}; "
        f"noise={NOISE} given to both sweeps; median of {args.repeats}"
    )
    print(f"{'case':<21} {'median (s)':>10} {'min (s)':>8} {'ratio':>26}  largest rel. diff")
    for name in cases:
        against, diff = reference[name]
        ratio = "" if against == "-" else f"{med[name] / med[against]:.1f}x {against}"
        print(f"{name:<21} {med[name]:>10.3f} {min(times[name]):>8.3f} {ratio:>26}  {diff}")
    speed = med["sweep generic"] / med["sweep exact-ridge"]
    loo = med["LOO ours (fit_full)"] / med["LOO RidgeCV"]
    ok_speed, ok_loo = speed >= SPEED_TARGET, loo <= LOO_TARGET
    print(
        f"generic / exact-ridge = {speed:.1f}  (target >= {SPEED_TARGET:g}: "
        f"{'met' if ok_speed else 'NOT met'})"
    )
    print(
        f"LOO ours / RidgeCV = {loo:.2f}  (target <= {LOO_TARGET:g}: "
        f"{'met' if ok_loo else 'NOT met'})"
    )
    return 0 if ok_speed and ok_loo else 1


if __name__ == "__main__":
    raise SystemExit(main())
