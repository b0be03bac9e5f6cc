"""Tests for complexity.decompose: test error, bias², variance and the bootstrap corrections."""

import numpy as np
import pytest

from complexity.accumulate import PointAccumulator
from complexity.decompose import bootstrap_632, curves_table, no_information_error
from complexity.engine import Outcome
from complexity.plans import SplitLayout


def test_632_worked_check():
    # METHODS.md §3 worked check (Efron & Tibshirani 1997): err_bar 0.1, Err1 0.3, gamma 0.5
    # -> R = 0.5, Err632 = 0.2264, Err632+ = 0.254902 (both algebraic forms agree).
    e632, e632p = bootstrap_632(0.1, 0.3, 0.5)
    assert e632 == pytest.approx(0.2264, abs=1e-12)
    assert e632p == pytest.approx(0.254902, abs=1e-6)
    w = 0.632 / (1 - 0.368 * 0.5)
    assert e632p == pytest.approx((1 - w) * 0.1 + w * 0.3, rel=1e-12)


def test_632_boundaries():
    # Efron & Tibshirani (1997) boundary rules, as documented in METHODS.md §3:
    # gamma <= err_bar (e.g. the mean predictor) -> R' = 0 -> Err632+ = Err632
    assert bootstrap_632(2.0, 2.5, 2.0)[1] == pytest.approx(bootstrap_632(2.0, 2.5, 2.0)[0])
    # Err1 >= gamma > err_bar -> 0.632 Err1' ... derived: 0.632*Err1 + 0.368*gamma? No: with
    # Err1' = gamma and R' = 1 the chosen form gives Err632 + (gamma - err_bar)*.368*.632/(1-.368)
    e632, e632p = bootstrap_632(0.0, 0.6, 0.5)
    assert e632p == pytest.approx(e632 + 0.5 * 0.368 * 0.632 / 0.632, rel=1e-12)


def test_no_information_error_double_sum():
    # METHODS.md §3: the O(n) form equals the double sum (1/n^2) sum_i sum_j (y_i - yhat_j)^2;
    # worked check x = 0..4, y = (1,3,2,5,4), line fit: gamma = 3.28.
    y = np.array([1.0, 3.0, 2.0, 5.0, 4.0])
    fitted = np.array([1.4, 2.2, 3.0, 3.8, 4.6])
    double = np.mean((y[:, None] - fitted[None, :]) ** 2)
    assert no_information_error(y, fitted) == pytest.approx(double, rel=1e-14)
    assert no_information_error(y, fitted) == pytest.approx(3.28, rel=1e-14)


def _mean_model_outcomes(y, B, seed):
    """Degree-0 (mean) model on bootstrap samples, scored out of bag."""
    rng = np.random.default_rng(seed)
    n = y.size
    for b in range(B):
        train = rng.integers(0, n, n)
        test = np.setdiff1d(np.arange(n), train)
        pred = y[train].mean()
        yield Outcome(b, b, test, (pred - y[test])[:, None], np.array([np.var(y[train])]))


def test_oob_mean_model_limits():
    # METHODS.md §2 worked check: degree-0 predictor, B -> infinity: fbar -> mean(y without i) and
    # v_i -> var0(y without i)/n, for y = (1,3,2,5,4):
    # fbar = (3.5, 3.0, 3.25, 2.5, 2.75), v = (0.25, 0.5, 0.4375, 0.25, 0.4375).
    y = np.array([1.0, 3.0, 2.0, 5.0, 4.0])
    B = 40000
    acc = PointAccumulator(5, 1, B, B)
    for out in _mean_model_outcomes(y, B, 0):
        acc.add(out)
    fbar = y + acc.mean[:, 0]
    v = acc.m2[:, 0] / acc.count[:, 0]
    # Monte-Carlo tolerance: 4 standard errors of a mean of B_i out-of-bag predictions
    tol = 4 * np.sqrt(v / acc.count[:, 0])
    assert np.all(np.abs(fbar - [3.5, 3.0, 3.25, 2.5, 2.75]) < tol)
    assert v == pytest.approx([0.25, 0.5, 0.4375, 0.25, 0.4375], abs=0.02)


_BOOT30 = SplitLayout("bootstrap", 30, 30.0, 11.0, True, False)
_CV4 = SplitLayout("cross-validation", 4, 2.0, 2.0, True, True, np.array([0, 0]))


def test_error_identity_holds_exactly():
    # METHODS.md §2: ERR = NB2 + VAR exactly, so ERR = noise + BIAS2 + VAR for any noise estimate.
    rng = np.random.default_rng(3)
    y = rng.normal(size=30)
    B = 300
    acc = PointAccumulator(30, 1, B, B)
    for out in _mean_model_outcomes(y, B, 1):
        acc.add(out)
    for noise in (0.0, 0.7):
        curves, _ = curves_table(acc, (0,), "degree", noise=noise, layout=_BOOT30)
        row = curves.iloc[0]
        parts = row.noise + row.bias_sq + row.variance + row.oob_excess
        assert row.test_mse == pytest.approx(parts, rel=1e-12)
        assert row.bias_sq_plus_noise == pytest.approx(row.bias_sq + noise, rel=1e-12)


def test_single_prediction_per_point_gives_no_variance_and_a_note():
    # with one prediction per point (K-fold, one repeat) the across-resample variance is undefined
    acc = PointAccumulator(4, 1, 2, 1)
    acc.add(Outcome(0, 0, np.array([0, 1]), np.array([[0.1], [0.2]]), np.array([0.0])))
    acc.add(Outcome(1, 0, np.array([2, 3]), np.array([[0.3], [-0.1]]), np.array([0.0])))
    curves, notes = curves_table(acc, (1,), "degree", noise=0.0, layout=_CV4)
    assert np.isnan(curves["variance"].iloc[0])
    assert curves["test_mse"].iloc[0] == pytest.approx(np.mean([0.01, 0.04, 0.09, 0.01]))
    assert any("at least two models" in n for n in notes)
