"""Hostile and odd inputs to ``cx.sweep``: each works (checked against a reference) or is refused.

RULES.md ("Bad input"): a refusal is a TypeError (wrong kind) or ValueError (wrong value) whose
message names the argument; an input array is never modified; no silent NaN in the curves. Each
case below builds fresh inputs, snapshots them, runs the sweep, checks the outcome, and checks
that every input is byte-for-byte unchanged. A hypothesis test fuzzes shapes and values on top.
"""

from __future__ import annotations

import copy
import re
import warnings
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
import pytest
import scipy.sparse
import statsmodels.api as sm
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp
from sklearn.base import BaseEstimator, RegressorMixin
from sklearn.linear_model import Ridge
from sklearn.model_selection import KFold
from sklearn.tree import DecisionTreeRegressor

import complexity as cx

CORE = ["train_mse", "test_mse", "test_mse_se", "variance", "bias_sq", "noise"]
SEED = 3


def _x(n: int = 30) -> np.ndarray:
    return np.linspace(0.0, 1.0, n)


def _y(n: int = 30) -> np.ndarray:
    x = _x(n)
    return np.sin(3 * x) + np.random.default_rng(0).normal(0.0, 0.1, n)


def _poly(top: int = 3) -> cx.PolynomialLadder:
    return cx.PolynomialLadder(range(0, top + 1))


class PolyFit(RegressorMixin, BaseEstimator):
    """Least-squares polynomial in the first column; misbehaves at ``bad_degree`` as told."""

    def __init__(self, degree: int = 1, bad_degree: int = -1, fault: str = "raise") -> None:
        self.degree = degree
        self.bad_degree = bad_degree
        self.fault = fault

    def fit(self, X, y):
        if self.degree == self.bad_degree and self.fault == "raise":
            raise RuntimeError(f"cannot fit degree {self.degree}")
        self.poly_ = np.polynomial.Polynomial.fit(np.asarray(X)[:, 0], y, self.degree)
        return self

    def predict(self, X):
        p = self.poly_(np.asarray(X)[:, 0])
        if self.degree == self.bad_degree and self.fault == "nan":
            p[::3] = np.nan
        if self.degree == self.bad_degree and self.fault == "length":
            p = p[:-1]
        return p


def _faulty(fault: str, bad: int = 2) -> cx.ParamLadder:
    return cx.ParamLadder(PolyFit(bad_degree=bad, fault=fault), "degree", [0, 1, 2, 3])


class EmptyFoldSplitter:
    """A splitter whose second split has an empty test set."""

    def split(self, X, y=None, groups=None):
        n = len(X)
        yield np.arange(n // 2), np.arange(n // 2, n)
        yield np.arange(n), np.array([], dtype=int)


class NoSplitSplitter:
    def split(self, X, y=None, groups=None):
        return iter(())


# --------------------------------------------------------------------------- the checks


def _snapshot(value: Any) -> Any:
    return copy.deepcopy(value)


def _assert_unchanged(before: Any, after: Any, name: str) -> None:
    assert type(before) is type(after), name
    if isinstance(after, np.ma.MaskedArray):
        assert np.array_equal(np.ma.getmaskarray(before), np.ma.getmaskarray(after)), name
        _assert_unchanged(np.ma.getdata(before), np.ma.getdata(after), name)
    elif isinstance(after, np.ndarray):
        assert (before.dtype, before.shape) == (after.dtype, after.shape), name
        if after.dtype.kind == "O":
            assert all(a is b or a == b for a, b in zip(before.ravel(), after.ravel())), name
        else:
            assert before.tobytes() == after.tobytes(), name
    elif isinstance(after, (pd.DataFrame, pd.Series)):
        if isinstance(after, pd.DataFrame):
            pd.testing.assert_frame_equal(before, after, check_exact=True)
        else:
            pd.testing.assert_series_equal(before, after, check_exact=True)
    elif scipy.sparse.issparse(after):
        assert (before != after).nnz == 0, name
    elif isinstance(after, list):
        assert before == after, name


def assert_no_silent_nan(result: cx.SweepResult, caught: list) -> None:
    """Every non-finite value in the curves is explained by a recorded failure or a note."""
    said = " ".join(result.notes) + " " + " ".join(str(w.message) for w in caught)
    for cap, row in result.curves[CORE].iterrows():
        for col, value in row.items():
            if np.isfinite(value):
                continue
            explained = cap in result.failures.index or col in said
            assert explained, f"silent non-finite {col} at capacity {cap!r}: {value!r}"


def _run(kw: dict[str, Any]) -> tuple[cx.SweepResult, list]:
    kw = resolve(kw)
    kw.setdefault("random_state", SEED)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        result = cx.sweep(**kw)
    return result, [w for w in caught if issubclass(w.category, cx.CapacityWarning)]


def resolve(kw: dict[str, Any]) -> dict[str, Any]:
    kw = {k: (v.make() if isinstance(v, Lazy) else v) for k, v in kw.items()}
    if kw.get("plan") is None:
        kw["plan"] = cx.Bootstrap(8)
    return kw


def _curves(kw: dict[str, Any]) -> pd.DataFrame:
    return _run(kw)[0].curves


@dataclass
class Case:
    id: str
    build: Callable[[], dict[str, Any]]
    error: type[BaseException] | None = None
    match: str = ""
    check: Callable[[cx.SweepResult, dict[str, Any], list], None] | None = None


def err(id: str, build, error, match: str) -> Case:
    return Case(id, build, error=error, match=match)


def ok(id: str, build, check) -> Case:
    return Case(id, build, check=check)


class Lazy:
    """A ladder or plan made inside the checked call, so that its own refusals are checked too."""

    def __init__(self, make: Callable[[], Any]) -> None:
        self.make = make


def data(**kw) -> Callable[[], dict[str, Any]]:
    """Factory of sweep arguments: fresh default data, overridden by ``kw``.

    Callables make fresh data values; for ``ladder`` and ``plan`` they are deferred (Lazy).
    """

    def build() -> dict[str, Any]:
        out: dict[str, Any] = {"ladder": Lazy(_poly), "X": _x(), "y": _y()}
        for k, v in kw.items():
            if k in ("ladder", "plan") and callable(v):
                out[k] = Lazy(v)
            else:
                out[k] = v() if callable(v) else v
        return out

    return build


def with_nan(a: np.ndarray, i: int = 4, value: float = np.nan) -> np.ndarray:
    a = a.copy()
    a[i] = value
    return a


# ----------------------------------------------------------------- references for "works" cases


def same_as(**reference_kw) -> Callable:
    """The curves equal (exactly) those of the same sweep on plain float arrays."""

    def check(result, kw, caught):
        ref_kw = {**{k: v for k, v in kw.items()}, **{k: v() for k, v in reference_kw.items()}}
        pd.testing.assert_frame_equal(result.curves, _curves(ref_kw), check_exact=True)

    return check


def train_error_matches_numpy_on_shifted_x(offset: float) -> Callable:
    # reference: numpy.polynomial.Polynomial.fit on x - offset (exact for x = offset + small
    # spread, Sterbenz lemma) and statsmodels OLS on centred powers
    def check(result, kw, caught):
        x = np.asarray(kw["X"], dtype=float) - offset
        y = kw["y"]
        for d in kw["ladder"].capacities:
            fit = np.polynomial.Polynomial.fit(x, y, d)
            ref = np.mean((fit(x) - y) ** 2)
            assert result.curves.loc[d, "train_mse"] == pytest.approx(ref, rel=1e-8)
        xc = x - x.mean()
        ols = sm.OLS(y, np.vander(xc, 3, increasing=True)).fit()
        assert result.curves.loc[2, "train_mse"] == pytest.approx(ols.ssr / len(y), rel=1e-8)
        assert np.all(np.isfinite(result.curves[["test_mse", "variance"]]))

    return check


def feature_offsets_match_statsmodels(result, kw, caught):
    # reference: statsmodels OLS with an intercept on the first k columns
    X, y = kw["X"], kw["y"]
    for k in kw["ladder"].capacities:
        ols = sm.OLS(y, sm.add_constant(X[:, :k] - 1e9, has_constant="add")).fit()
        assert result.curves.loc[k, "train_mse"] == pytest.approx(ols.ssr / len(y), rel=1e-7)


def translation_invariant(result, kw, caught):
    # law: adding a constant to y shifts every fit by that constant (models with an intercept),
    # so no error changes; the offset costs ~1e9 * 2.2e-16 absolute precision in y
    ref = _curves({**kw, "y": kw["y"] - 1e9})
    cols = ["train_mse", "test_mse", "variance"]
    np.testing.assert_allclose(result.curves[cols], ref[cols], rtol=1e-5)


def constant_y_is_fitted_exactly(result, kw, caught):
    # every ladder contains the constant, so every error is zero up to rounding (common practice)
    assert np.all(np.abs(result.curves[["train_mse", "test_mse", "variance"]]) < 1e-20)
    assert result.noise.value == pytest.approx(0.0, abs=1e-20)
    assert result.recommended == kw["ladder"].capacities[0]


def sorted_like_given_in_order(result, kw, caught):
    assert list(result.curves.index) == [0, 1, 2, 3]
    ref = _curves({**kw, "ladder": _poly(3)})
    pd.testing.assert_frame_equal(result.curves, ref, check_exact=True)


def failure_is_isolated(fault: str, message: str) -> Callable:
    # reference: the same sweep without the failing capacity (same resamples, same seed)
    def check(result, kw, caught):
        assert 2 in result.failures.index
        assert message in result.failures.loc[2, "first_message"]
        assert any("fit(s) failed" in str(w.message) for w in caught)
        assert not np.isfinite(result.curves.loc[2, "test_mse"])
        good = cx.ParamLadder(PolyFit(bad_degree=2, fault=fault), "degree", [0, 1, 3])
        ref = _curves({**kw, "ladder": good})
        cols = ["train_mse", "test_mse", "variance"]
        pd.testing.assert_frame_equal(
            result.curves.loc[[0, 1, 3], cols], ref[cols], check_exact=True
        )

    return check


def tree_on_constant_x_is_the_mean(result, kw, caught):
    # METHODS.md §2: ERR = mean_i of mean_b (prediction - y_i)^2 over the resamples leaving i out,
    # a tree on a constant x cannot split, so each prediction is the training mean
    X, y = np.asarray(kw["X"], dtype=float).reshape(-1, 1), kw["y"]
    sq = [[] for _ in y]
    for train, test in kw["plan"].split(X, random_state=SEED):
        for i in test:
            sq[i].append((y[train].mean() - y[i]) ** 2)
    # Err^(1) of Efron & Tibshirani (1997), METHODS.md §3: every point with B_i > 0
    ref = np.mean([np.mean(s) for s in sq if len(s) >= 1])
    for depth in kw["ladder"].capacities:
        assert result.curves.loc[depth, "test_mse"] == pytest.approx(ref, rel=1e-12)


def three_rows_loo_is_press(result, kw, caught):
    # Allen (1974) PRESS for the mean model: leave-one-out error = (n / (n - 1))^2 * mean((y - ybar)^2)
    y = kw["y"]
    n = len(y)
    assert result.curves.loc[0, "test_mse"] == pytest.approx(
        (n / (n - 1)) ** 2 * np.mean((y - y.mean()) ** 2), rel=1e-12
    )
    assert result.curves.loc[1, "test_mse"] > 0


def scale_invariant_in_x(result, kw, caught):
    # law: a polynomial fit is unchanged by an affine map of x; the basis maps x onto [-1, 1]
    ref = _curves({**kw, "X": _x()})
    np.testing.assert_allclose(result.curves[CORE], ref[CORE], rtol=1e-9, atol=1e-15)


def constant_column_adds_nothing(result, kw, caught):
    # law: with an intercept already in the model, a constant predictor changes no fit; a
    # least-squares engine may instead refuse the rank-deficient design, and must say so
    cols = ["train_mse", "test_mse", "variance"]
    if 2 in result.failures.index:
        assert "rank deficient" in result.failures.loc[2, "first_message"]
        assert np.all(np.isfinite(result.curves.loc[1, cols]))
    else:
        np.testing.assert_allclose(
            result.curves.loc[2, cols], result.curves.loc[1, cols], rtol=1e-9
        )


def overflow_is_a_recorded_failure(result, kw, caught):
    # a line extrapolated to x = 5e154 misses by ~1e154: its squared error is not a float64;
    # the resamples that hold that point out are recorded as failed fits, the rest are used
    assert "error sums overflow float64" in result.failures.loc[1, "first_message"]
    assert 0 < result.failures.loc[1, "count"] < 8
    assert any("fit(s) failed" in str(w.message) for w in caught)
    assert np.all(np.isfinite(result.curves[["train_mse", "test_mse", "test_mse_se"]]))


def interpolation_is_flagged(result, kw, caught):
    # 5 distinct x with 6 replicates each: degree 4 passes through every group mean, so its
    # training error is the pure-error mean square sum (y - group mean)^2 / n (Draper & Smith,
    # Applied Regression Analysis, lack-of-fit test; from memory)
    assert any("interpolates" in str(w.message) for w in caught)
    x, y = kw["X"], kw["y"]
    pure = sum(np.sum((y[x == v] - y[x == v].mean()) ** 2) for v in np.unique(x)) / len(y)
    assert result.curves.loc[4, "train_mse"] == pytest.approx(pure, rel=1e-9)


def simulation_ignores_observed_data(result, kw, caught):
    ref = _curves({k: v for k, v in kw.items() if k not in ("X", "y")})
    pd.testing.assert_frame_equal(result.curves, ref, check_exact=True)
    assert result.metadata["n_samples"] == 30


def _sim(truth=None, noise_sd=0.1, sampler=None, **kw) -> Callable[[], cx.Simulation]:
    def build():
        return cx.Simulation(
            truth or (lambda X: np.sin(3 * X[:, 0])),
            noise_sd,
            _x(20) if sampler is None else sampler,
            x_eval=_x(15),
            n_resamples=6,
            **kw,
        )

    return build


def sim_case(plan: Callable[[], cx.Simulation]) -> Callable[[], dict[str, Any]]:
    return lambda: {"ladder": Lazy(_poly), "plan": Lazy(plan)}


def df_with(**cols) -> Callable[[], pd.DataFrame]:
    return lambda: pd.DataFrame({"a": _x(), **{k: v() for k, v in cols.items()}})


# --------------------------------------------------------------------------------- the table

CASES = [
    # ---- non-finite values
    err(
        "X-nan",
        data(X=lambda: with_nan(_x())),
        ValueError,
        r"X contains NaN or infinite values in 1 row",
    ),
    err(
        "X-inf",
        data(X=lambda: with_nan(_x(), 7, np.inf)),
        ValueError,
        r"X contains NaN or infinite .*row 7",
    ),
    err(
        "X-2d-neg-inf",
        data(X=lambda: np.c_[_x(), with_nan(_x(), 2, -np.inf)], ladder=cx.FeatureLadder([1, 2])),
        ValueError,
        r"X contains NaN or infinite",
    ),
    err(
        "y-nan",
        data(y=lambda: with_nan(_y())),
        ValueError,
        r"y contains NaN or infinite values at 1 position",
    ),
    err(
        "y-inf",
        data(y=lambda: with_nan(_y(), 0, np.inf)),
        ValueError,
        r"y contains NaN or infinite .*first: 0",
    ),
    err(
        "y-pandas-NA",
        data(y=lambda: pd.Series(_y()).astype("Float64").where(_x() < 0.9)),
        ValueError,
        r"y contains NaN",
    ),
    err(
        "X-pandas-Int64-NA",
        data(X=lambda: pd.DataFrame({"a": pd.array([1, None, *range(2, 30)], dtype="Int64")})),
        ValueError,
        r"X contains NaN",
    ),
    # ---- wrong kinds of values
    err(
        "X-object-strings",
        data(X=lambda: np.array(["a"] * 30, dtype=object)),
        TypeError,
        r"X must contain only numbers; got an array of dtype object",
    ),
    err(
        "X-df-string-column",
        data(X=df_with(b=lambda: ["s"] * 30), ladder=cx.FeatureLadder([1, 2])),
        TypeError,
        r"X has non-numeric columns \['b'\]",
    ),
    err(
        "X-df-bool-column",
        data(X=df_with(b=lambda: _x() > 0.5), ladder=cx.FeatureLadder([1, 2])),
        TypeError,
        r"X has non-numeric columns \['b'\]",
    ),
    err(
        "X-df-category-column",
        data(X=df_with(b=lambda: pd.Categorical(["u", "v"] * 15)), ladder=cx.FeatureLadder([1, 2])),
        TypeError,
        r"X has non-numeric columns \['b'\]",
    ),
    err(
        "X-df-complex-column",
        data(X=df_with(b=lambda: _x() + 1j), ladder=cx.FeatureLadder([1, 2])),
        TypeError,
        r"X has non-numeric columns \['b'\]",
    ),
    err("X-bool", data(X=lambda: _x() > 0.5), TypeError, r"X must be numeric; got a boolean array"),
    err(
        "X-complex", data(X=lambda: _x() + 1j), TypeError, r"X must hold real numbers; got complex"
    ),
    err(
        "X-datetime",
        data(X=lambda: np.arange(30).astype("datetime64[D]")),
        TypeError,
        r"X holds dates or time spans",
    ),
    err(
        "X-sparse",
        data(X=lambda: scipy.sparse.csr_matrix(_x().reshape(-1, 1))),
        TypeError,
        r"X is a scipy sparse matrix",
    ),
    err(
        "X-masked",
        data(X=lambda: np.ma.masked_greater(_x(), 0.5)),
        ValueError,
        r"X is a masked array with 15 masked value",
    ),
    err(
        "X-ragged",
        data(X=lambda: [[0.0, 1.0], [2.0]] * 15),
        ValueError,
        r"X must be a rectangular array",
    ),
    err("X-None", data(X=None), TypeError, r"X must be an array-like of numbers; got None"),
    err("X-string", data(X="x.csv"), TypeError, r"X must be an array-like of numbers; got 'x.csv'"),
    err(
        "y-strings", data(y=lambda: np.array(["a"] * 30)), TypeError, r"y must contain only numbers"
    ),
    err("y-bool", data(y=lambda: _y() > 0), TypeError, r"y must be numeric; got a boolean array"),
    err("y-complex", data(y=lambda: _y() + 0j), TypeError, r"y must hold real numbers"),
    # ---- shapes and sizes
    err("X-scalar", data(X=3.0), ValueError, r"X must be 1-D or 2-D; got an array with shape \(\)"),
    err("X-3d", data(X=lambda: np.zeros((30, 1, 1))), ValueError, r"X must be 1-D or 2-D"),
    err("X-no-columns", data(X=lambda: np.zeros((30, 0))), ValueError, r"X has no columns"),
    err(
        "zero-rows",
        data(X=lambda: _x()[:0], y=lambda: _y()[:0]),
        ValueError,
        r"X is empty \(0 rows\)",
    ),
    err(
        "one-row",
        data(X=lambda: _x()[:1], y=lambda: _y()[:1]),
        ValueError,
        r"X and y have 1 observation\(s\); at least 3",
    ),
    err(
        "two-rows",
        data(X=lambda: _x()[:2], y=lambda: _y()[:2]),
        ValueError,
        r"X and y have 2 observation\(s\); at least 3",
    ),
    err(
        "length-mismatch",
        data(y=lambda: _y()[:29]),
        ValueError,
        r"X and y have different lengths: X has 30 rows, y has 29",
    ),
    err(
        "y-two-columns",
        data(y=lambda: np.c_[_y(), _y()]),
        ValueError,
        r"y must be 1-D \(one response\); got shape \(30, 2\)",
    ),
    err(
        "y-frame-two-columns",
        data(y=lambda: pd.DataFrame({"a": _y(), "b": _y()})),
        ValueError,
        r"y must be one column",
    ),
    # ---- degenerate values
    err("x-all-equal", data(X=lambda: np.full(30, 4.2)), ValueError, r"X column 0 is constant"),
    err(
        "x-range-overflows",
        data(X=lambda: np.r_[-1e308, _x()[1:-1], 1e308]),
        ValueError,
        r"X column 0 ranges from .*overflows",
    ),
    err(
        "y-too-large",
        data(y=lambda: _y() * 1e200),
        ValueError,
        r"y has values as large as .*Rescale y",
    ),
    err(
        "y-spread-underflows",
        data(y=lambda: _y() * 1e-300),
        ValueError,
        r"y varies only over .*Rescale y",
    ),
    # ---- ladders the data cannot support, or malformed
    err(
        "degrees-beyond-data",
        data(X=lambda: np.repeat(_x(5), 6), ladder=lambda: _poly(12)),
        ValueError,
        r"degrees reach 12, which needs 13 coefficients, but X has only 5 distinct",
    ),
    err(
        "degrees-duplicated",
        data(ladder=lambda: cx.PolynomialLadder([1, 2, 2])),
        ValueError,
        r"degrees contains repeated values \[2\]",
    ),
    err(
        "degrees-negative",
        data(ladder=lambda: cx.PolynomialLadder([-1, 2])),
        ValueError,
        r"degrees must contain whole numbers >= 0; got -1",
    ),
    err(
        "degrees-float",
        data(ladder=lambda: cx.PolynomialLadder([1, 2.0])),
        TypeError,
        r"degrees must contain whole numbers",
    ),
    err(
        "degrees-empty",
        data(ladder=lambda: cx.PolynomialLadder([])),
        ValueError,
        r"degrees is empty",
    ),
    err(
        "counts-beyond-columns",
        data(X=lambda: np.c_[_x(), _x() ** 2], ladder=lambda: cx.FeatureLadder(range(1, 5))),
        ValueError,
        r"counts reach 4, but only 2 predictor",
    ),
    err(
        "counts-duplicated",
        data(ladder=lambda: cx.FeatureLadder([1, 1])),
        ValueError,
        r"counts contains repeated values",
    ),
    err(
        "order-unknown-name",
        data(ladder=lambda: cx.FeatureLadder([1], order=["temp"])),
        ValueError,
        r"order names column 'temp'",
    ),
    err(
        "param-values-duplicated",
        data(ladder=lambda: cx.ParamLadder(Ridge(), "alpha", [1.0, 1.0])),
        ValueError,
        r"values contains 1.0 more than once",
    ),
    err(
        "param-unknown",
        data(ladder=lambda: cx.ParamLadder(Ridge(), "alphas", [1.0])),
        ValueError,
        r"param='alphas' is not a parameter of Ridge",
    ),
    err(
        "ladder-not-a-ladder",
        data(ladder=lambda: Ridge()),
        TypeError,
        r"ladder must be cx.PolynomialLadder",
    ),
    # ---- plans
    err(
        "splitter-empty-fold",
        data(plan=lambda: EmptyFoldSplitter()),
        ValueError,
        r"plan .* produced an empty test set in split 1",
    ),
    err(
        "splitter-no-splits",
        data(plan=lambda: NoSplitSplitter()),
        ValueError,
        r"plan .* produced no splits",
    ),
    err("kfold-more-splits-than-rows", data(plan=lambda: KFold(50)), ValueError, r"n_splits=50"),
    err(
        "cv-more-splits-than-rows",
        data(plan=lambda: cx.CrossValidation(40)),
        ValueError,
        r"n_splits=40 is more than the number of rows \(30\)",
    ),
    err(
        "bootstrap-one-resample",
        data(plan=lambda: cx.Bootstrap(1)),
        ValueError,
        r"n_resamples must be an int >= 2",
    ),
    err("plan-string", data(plan="bootstrap"), TypeError, r"plan must be cx.Bootstrap"),
    err("plan-float", data(plan=2.5), TypeError, r"plan must be cx.Bootstrap"),
    # ---- estimators that fail everywhere
    err(
        "every-fit-fails",
        data(ladder=lambda: cx.ParamLadder(PolyFit(bad_degree=1), "degree", [1])),
        cx.SweepFailedError,
        r"every fit failed .*cannot fit degree 1",
    ),
    # ---- simulations
    err(
        "truth-wrong-length",
        sim_case(plan=_sim(truth=lambda X: X[:3, 0])),
        ValueError,
        r"truth must return one value per row .*shape \(3,\)",
    ),
    err(
        "truth-two-columns",
        sim_case(plan=_sim(truth=lambda X: np.c_[X, X])),
        ValueError,
        r"truth must return one value per row .*shape \(15, 2\)",
    ),
    err(
        "truth-raises",
        sim_case(plan=_sim(truth=lambda X: 1 / 0)),
        ValueError,
        r"truth raised ZeroDivisionError",
    ),
    err(
        "truth-nan",
        sim_case(plan=_sim(truth=lambda X: X[:, 0] * np.nan)),
        ValueError,
        r"truth returned NaN",
    ),
    err(
        "sampler-wrong-rows",
        sim_case(plan=_sim(sampler=lambda rng, n: rng.uniform(size=n - 1), n_train=20)),
        ValueError,
        r"x_sampler\(rng, 20\) returned 19 rows",
    ),
    err(
        "noise_sd-negative",
        sim_case(plan=_sim(noise_sd=-0.1)),
        ValueError,
        r"noise_sd must be >= 0.0; got -0.1",
    ),
    # ---- options
    err("noise-negative", data(noise=-1.0), ValueError, r"noise must be .*got -1.0"),
    err("noise-nan", data(noise=float("nan")), ValueError, r"noise must be .*got nan"),
    err("noise-unknown", data(noise="robust"), ValueError, r"noise must be .*got 'robust'"),
    err("rule-unknown", data(rule="best"), ValueError, r"rule must be one of .*got 'best'"),
    err(
        "rule-needs-criteria",
        data(ladder=lambda: _faulty("none"), rule="aic"),
        ValueError,
        r"rule='aic' needs",
    ),
    err("engine-unknown", data(engine="fast"), ValueError, r"engine must be one of .*got 'fast'"),
    err(
        "engine-exact-impossible",
        data(ladder=lambda: _faulty("none"), engine="exact"),
        ValueError,
        r"engine='exact' needs a least-squares ladder",
    ),
    err("n_jobs-string", data(n_jobs="two"), TypeError, r"n_jobs must be None or an int"),
    err("n_jobs-zero", data(n_jobs=0), ValueError, r"n_jobs must be None or a non-zero int"),
    err(
        "random_state-negative",
        data(random_state=-1),
        ValueError,
        r"random_state must be a non-negative int",
    ),
    err(
        "random_state-float",
        data(random_state=1.5),
        TypeError,
        r"random_state must be None, an int",
    ),
    err(
        "sample_weight-negative",
        data(
            ladder=lambda: cx.ParamLadder(Ridge(), "alpha", [0.1, 1.0]),
            sample_weight=lambda: with_nan(np.ones(30), 3, -1.0),
        ),
        ValueError,
        r"sample_weight must be >= 0; got -1.0 at position 3",
    ),
    err(
        "sample_weight-length",
        data(sample_weight=lambda: np.ones(3)),
        ValueError,
        r"sample_weight must hold one weight per row of X \(30\); got shape \(3,\)",
    ),
    err(
        "sample_weight-all-zero",
        data(sample_weight=lambda: np.zeros(30)),
        ValueError,
        r"sample_weight is zero everywhere",
    ),
    err(
        "sample_weight-strings",
        data(sample_weight=lambda: ["a"] * 30),
        TypeError,
        r"sample_weight must contain only numbers",
    ),
    err(
        "groups-length",
        data(groups=lambda: [1, 2]),
        ValueError,
        r"groups must be 1-D with one label per row of X \(30\)",
    ),
    err("progress-not-bool", data(progress="yes"), TypeError, r"progress must be True or False"),
    err(
        "checkpoint-not-a-path",
        data(checkpoint=3),
        TypeError,
        r"checkpoint must be None or a folder path",
    ),
    # ---- inputs that must work, checked against a reference
    ok("x-offset-1e9", data(X=lambda: 1e9 + _x()), train_error_matches_numpy_on_shifted_x(1e9)),
    ok(
        "x-offset-1e9-generic",
        data(X=lambda: 1e9 + _x(), engine="generic"),
        train_error_matches_numpy_on_shifted_x(1e9),
    ),
    ok(
        "features-offset-1e9",
        data(
            X=lambda: 1e9 + np.c_[_x(), _x() ** 2, np.cos(5 * _x())],
            ladder=lambda: cx.FeatureLadder([1, 2, 3]),
        ),
        feature_offsets_match_statsmodels,
    ),
    ok("y-offset-1e9", data(y=lambda: _y() + 1e9), translation_invariant),
    ok("y-constant", data(y=lambda: np.full(30, 2.5)), constant_y_is_fitted_exactly),
    ok(
        "y-constant-generic",
        data(y=lambda: np.full(30, 2.5), engine="generic"),
        constant_y_is_fitted_exactly,
    ),
    ok(
        "degrees-unsorted",
        data(ladder=lambda: cx.PolynomialLadder([3, 0, 2, 1])),
        sorted_like_given_in_order,
    ),
    ok("X-object-numbers", data(X=lambda: _x().astype(object)), same_as(X=_x)),
    ok(
        "y-numeric-strings", data(y=lambda: np.array([repr(float(v)) for v in _y()])), same_as(y=_y)
    ),
    ok(
        "X-integers",
        data(X=lambda: np.arange(30), y=lambda: _y()),
        same_as(X=lambda: np.arange(30.0)),
    ),
    ok(
        "X-fortran-strided-readonly",
        data(X=lambda: _readonly(np.asfortranarray(np.c_[_x(), _x()])[:, :1])),
        same_as(X=lambda: _x().reshape(-1, 1)),
    ),
    ok(
        "X-y-pandas",
        data(X=lambda: pd.DataFrame({"t": _x()}), y=lambda: pd.Series(_y())),
        same_as(X=_x, y=_y),
    ),
    ok("X-y-lists", data(X=lambda: _x().tolist(), y=lambda: _y().tolist()), same_as(X=_x, y=_y)),
    ok("X-masked-nothing-masked", data(X=lambda: np.ma.masked_array(_x())), same_as(X=_x)),
    ok(
        "estimator-raises-at-one-capacity",
        data(ladder=lambda: _faulty("raise")),
        failure_is_isolated("raise", "RuntimeError: cannot fit degree 2"),
    ),
    ok(
        "estimator-nan-at-one-capacity",
        data(ladder=lambda: _faulty("nan")),
        failure_is_isolated("nan", "NaN or infinite predictions"),
    ),
    ok(
        "estimator-short-predictions",
        data(ladder=lambda: _faulty("length")),
        failure_is_isolated("length", "predict returned 29 values for 30 rows"),
    ),
    ok(
        "x-all-equal-tree",
        data(
            X=lambda: np.full(30, 4.2),
            ladder=lambda: cx.ParamLadder(DecisionTreeRegressor(), "max_depth", [1, 3]),
        ),
        tree_on_constant_x_is_the_mean,
    ),
    ok(
        "three-rows-leave-one-out",
        data(
            X=lambda: _x()[:3],
            y=lambda: _y()[:3],
            ladder=lambda: cx.PolynomialLadder([0, 1]),
            plan=lambda: cx.CrossValidation(3),
        ),
        three_rows_loo_is_press,
    ),
    ok(
        "x-tiny-spread-generic",
        data(X=lambda: _x() * 1e-100, engine="generic"),
        scale_invariant_in_x,
    ),
    ok(
        "x-tiny-spread-exact",
        data(X=lambda: _x() * 1e-100),
        scale_invariant_in_x,
    ),
    ok(
        "constant-extra-column-generic",
        data(
            X=lambda: np.c_[_x(), np.ones(30)],
            ladder=lambda: cx.FeatureLadder([1, 2]),
            engine="generic",
        ),
        constant_column_adds_nothing,
    ),
    ok(
        "constant-extra-column-exact",
        data(X=lambda: np.c_[_x(), np.ones(30)], ladder=lambda: cx.FeatureLadder([1, 2])),
        constant_column_adds_nothing,
    ),
    err(  # exact path: in-bag the outlier makes the scaled design rank deficient, out of bag
        # its prediction overflows, so no fit survives
        "outlier-breaks-every-exact-fit",
        data(X=lambda: np.r_[_x()[:29], 5e154], ladder=lambda: cx.FeatureLadder([1])),
        cx.SweepFailedError,
        r"every fit failed at every capacity.*rank deficient",
    ),
    ok(
        "held-out-outlier-overflows-generic",
        data(
            X=lambda: np.r_[_x()[:29], 5e154],
            ladder=lambda: cx.FeatureLadder([1]),
            engine="generic",
        ),
        overflow_is_a_recorded_failure,
    ),
    ok(
        "degree-interpolates",
        data(X=lambda: np.repeat(_x(5), 6), ladder=lambda: _poly(4)),
        interpolation_is_flagged,
    ),
    ok(
        "simulation-with-observed-data",
        lambda: {"ladder": Lazy(_poly), "X": _x(), "y": _y(), "plan": Lazy(_sim())},
        simulation_ignores_observed_data,
    ),
]


def _readonly(a: np.ndarray) -> np.ndarray:
    a.flags.writeable = False
    return a


def _check_case(case: Case) -> None:
    kw = case.build()
    before = {k: _snapshot(v) for k, v in kw.items()}
    if case.error is not None:
        with pytest.raises(case.error, match=case.match):
            _run(kw)
    else:
        result, caught = _run(kw)
        assert_no_silent_nan(result, caught)
        case.check(result, resolve(kw), caught)
    for k, v in kw.items():
        if not isinstance(v, Lazy):
            _assert_unchanged(before[k], v, k)


@pytest.mark.filterwarnings("ignore::RuntimeWarning")
@pytest.mark.parametrize("case", CASES, ids=[c.id for c in CASES])
def test_hostile_input(case: Case) -> None:
    _check_case(case)


def test_the_table_is_large_and_distinct():
    ids = [c.id for c in CASES]
    assert len(set(ids)) == len(ids) >= 40
    assert sum(c.error is None for c in CASES) >= 15  # works-cases, each with a reference


def test_error_messages_name_their_argument():
    # every refusal pattern above starts from the argument's own name (or the plan's)
    names = (
        "X",
        "y",
        "degrees",
        "counts",
        "order",
        "values",
        "param",
        "ladder",
        "plan",
        "n_splits",
        "n_resamples",
        "every fit",
        "truth",
        "x_sampler",
        "noise_sd",
        "noise",
        "rule",
        "engine",
        "n_jobs",
        "random_state",
        "sample_weight",
        "groups",
        "progress",
        "checkpoint",
    )
    for case in CASES:
        if case.error is not None:
            assert re.search(r"\b(" + "|".join(map(re.escape, names)) + r")\b", case.match), case.id


# ------------------------------------------------------------------------------ fuzzing

_clean = st.one_of(st.floats(-1e3, 1e3), st.integers(-5, 5).map(float))
_dirty = st.one_of(  # ordinary numbers mixed with NaN, inf, huge and subnormal values
    _clean, st.floats(allow_nan=True, allow_infinity=True, width=64)
)
_ARGUMENT = re.compile(r"\b(X|y|degrees|counts|n_splits|plan|every fit)\b")


@st.composite
def _inputs(draw):
    n = draw(st.sampled_from([0, 1, 2, *range(3, 15), *range(3, 15)]))
    p = draw(st.sampled_from([0, 1, 2]))  # 0: a 1-D X
    values = _dirty if draw(st.booleans()) else _clean
    X = draw(hnp.arrays(np.float64, (n,) if p == 0 else (n, p), elements=values))
    m = draw(st.sampled_from([n, n, n, n, max(n - 1, 0)]))
    y = draw(hnp.arrays(np.float64, (m,), elements=values))
    ladder = draw(
        st.sampled_from(
            [
                cx.PolynomialLadder([0, 1, 2]),
                cx.FeatureLadder([1]),
                cx.ParamLadder(DecisionTreeRegressor(), "max_depth", [1, 2]),
            ]
        )
    )
    plan = draw(
        st.sampled_from(
            [cx.Bootstrap(4), cx.CrossValidation(3), cx.CrossValidation(2, n_repeats=2)]
        )
    )
    engine = draw(st.sampled_from(["auto", "generic"]))
    return X, y, ladder, plan, engine


@pytest.mark.filterwarnings("ignore::RuntimeWarning")
@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(_inputs())
def test_fuzzed_shapes_and_values(inputs):
    X, y, ladder, plan, engine = inputs
    X0, y0 = X.copy(), y.copy()
    try:
        result, caught = _run(
            {"ladder": ladder, "X": X, "y": y, "plan": plan, "engine": engine, "random_state": 0}
        )
    except (TypeError, ValueError, cx.SweepFailedError) as exc:
        event(f"refused: {type(exc).__name__}")
        assert _ARGUMENT.search(str(exc)), f"message names no argument: {exc}"
    else:
        event("swept")
        assert_no_silent_nan(result, caught)
        assert np.isfinite(result.curves.loc[result.recommended, "test_mse"])
    assert X.tobytes() == X0.tobytes() and y.tobytes() == y0.tobytes()
