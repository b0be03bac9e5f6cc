"""Tests for complexity.decompose: test error, bias², variance and the bootstrap corrections."""

import warnings

import numpy as np
import pytest
from numpy.polynomial import legendre

import complexity as cx
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


# ---------------------------------------------------------------- the parts against the truth
# Known-truth simulations: data sets drawn from y = f(x) + N(0, sigma^2), x ~ U(-1, 1). Each check
# compares the mean of a sweep's column over many data sets with the true value, with a tolerance
# from the Monte-Carlo standard error where the criterion names one.

SIGMA = 0.5


def _quadratic(x):
    return 1.0 + 2.0 * x - 1.5 * x**2


def _sweeps(f, n, plan, degrees, n_sets, seed, noise=None, exact_noise=False):
    rng = np.random.default_rng(seed)
    out = []
    for d in range(n_sets):
        x = rng.uniform(-1.0, 1.0, n)
        eps = rng.normal(0.0, SIGMA, n)
        given = float(np.mean(eps**2)) if exact_noise else noise
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            result = cx.sweep(
                cx.PolynomialLadder(degrees),
                x,
                f(x) + eps,
                plan=plan,
                noise="auto" if given is None else given,
                random_state=d,
            )
        out.append(result.curves)
    return out


def _truth_at_size(f, degree, r, seed, reps=1500):
    """Monte-Carlo variance and squared bias of a degree-`degree` least-squares fit at size r."""
    rng = np.random.default_rng(seed)
    x_eval = rng.uniform(-1.0, 1.0, 200)
    pred = np.empty((reps, x_eval.size))
    for k in range(reps):
        x = rng.uniform(-1.0, 1.0, r)
        coef = legendre.legfit(x, f(x) + rng.normal(0.0, SIGMA, r), degree)
        pred[k] = legendre.legval(x_eval, coef)
    return float(pred.var(axis=0, ddof=1).mean()), float(np.mean((pred.mean(0) - f(x_eval)) ** 2))


@pytest.mark.parametrize(
    "plan", [cx.Bootstrap(200), cx.CrossValidation(10, n_repeats=5)], ids=["bootstrap", "cv10x5"]
)
def test_bias_sq_is_unbiased_where_the_model_contains_the_truth(plan):
    # Gauss-Markov (METHODS.md §1): least squares is unbiased once the degree contains the truth,
    # so the mean of bias_sq over data sets must be ~0 there: within 4 Monte-Carlo SE + 0.5
    # sigma² p / n (the criterion of the issue that found the old column 1.3-2.3 sigma² p / n high)
    n, n_sets, degrees = 40, 40, range(2, 8)
    curves = _sweeps(_quadratic, n, plan, degrees, n_sets, seed=7, exact_noise=True)
    b2 = np.array([c["bias_sq"].to_numpy() for c in curves])
    p = np.arange(3, 9)
    tol = 4 * b2.std(axis=0, ddof=1) / np.sqrt(n_sets) + 0.5 * SIGMA**2 * p / n
    assert np.all(np.abs(b2.mean(axis=0)) <= tol), (b2.mean(axis=0), tol)


@pytest.mark.parametrize(
    ("plan", "train_size"),
    [
        (cx.Bootstrap(200), 60),
        (cx.CrossValidation(10, n_repeats=3), 54),
        (cx.CrossValidation(60, n_repeats=2), 59),  # repeated leave-one-out
    ],
    ids=["bootstrap", "cv10x3", "loo-x2"],
)
@pytest.mark.parametrize(
    ("f", "degrees"),
    [(lambda x: 0.0 * x, range(0, 4)), (_quadratic, range(2, 4))],
    ids=["pure-noise", "quadratic"],
)
def test_variance_is_the_sampling_variance_at_the_stated_training_size(
    plan, train_size, f, degrees
):
    # the truth: the variance of the fit over fresh training sets of the plan's training size
    # (Monte Carlo; METHODS.md §1 definition); the band is [0.75, 1.33]
    curves = _sweeps(f, 60, plan, degrees, 30, seed=11, noise=SIGMA**2)
    var = np.array([c["variance"].to_numpy() for c in curves]).mean(axis=0)
    truth = np.array([_truth_at_size(f, d, train_size, seed=d)[0] for d in degrees])
    assert np.all((var / truth >= 0.75) & (var / truth <= 1.33)), var / truth


@pytest.mark.parametrize(
    ("plan", "train_size"),
    [(cx.Bootstrap(200), 60), (cx.CrossValidation(10, n_repeats=3), 54)],
    ids=["bootstrap", "cv10x3"],
)
def test_bias_sq_of_a_too_simple_model_is_its_squared_bias(plan, train_size):
    # misspecified truth: the squared bias is the distance of the mean fit from f (ESL §7.3, from
    # memory), measured by Monte Carlo; within 25 % wherever it exceeds twice the variance
    def f(x):
        return np.sin(3.0 * x)

    degrees = range(0, 5)
    curves = _sweeps(f, 60, plan, degrees, 30, seed=5, noise=SIGMA**2)
    b2 = np.array([c["bias_sq"].to_numpy() for c in curves]).mean(axis=0)
    truth = np.array([_truth_at_size(f, d, train_size, seed=d) for d in degrees])
    big = truth[:, 1] > 2 * truth[:, 0]
    assert big.sum() >= 2
    assert np.all(np.abs(b2[big] / truth[big, 1] - 1) <= 0.25), b2[big] / truth[big, 1]


@pytest.mark.parametrize(
    "plan",
    [
        cx.Bootstrap(200),
        cx.CrossValidation(10),
        cx.CrossValidation(10, n_repeats=3),
        cx.CrossValidation(10, n_repeats=10),
    ],
    ids=["bootstrap", "cv-R1", "cv-R3", "cv-R10"],
)
def test_standard_error_does_not_shrink_with_repeats(plan):
    # the SE must describe the spread of test_mse from data set to data set: mean SE / SD in
    # [0.7, 1.4] for any number of repeats (Bengio & Grandvalet 2004: no unbiased estimator exists,
    # so a band, not equality)
    curves = _sweeps(_quadratic, 60, plan, range(2, 3), 60, seed=3, noise=SIGMA**2)
    err = np.array([c["test_mse"].iloc[0] for c in curves])
    se = np.array([c["test_mse_se"].iloc[0] for c in curves])
    assert 0.7 <= se.mean() / err.std(ddof=1) <= 1.4, se.mean() / err.std(ddof=1)


def test_out_of_bag_error_uses_every_out_of_bag_prediction():
    # Efron & Tibshirani (1997) Err^(1), METHODS.md §3: every point with B_i > 0 enters, also
    # those left out by one resample only; only the variance needs two predictions
    rng = np.random.default_rng(2)
    x = np.linspace(-1, 1, 24)
    y = _quadratic(x) + rng.normal(0, SIGMA, 24)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = cx.sweep(
            cx.PolynomialLadder([3]),
            x,
            y,
            plan=cx.Bootstrap(5),
            random_state=0,
            keep_predictions=True,
        )
    pred = result.predictions[:, :, 0]
    scored = np.isfinite(pred)
    assert (scored.sum(axis=0) == 1).any()  # the case the rule is about occurs here
    per_point = np.nanmean((pred - y) ** 2, axis=0)[scored.any(axis=0)]
    assert result.curves["test_mse"].iloc[0] == pytest.approx(per_point.mean(), rel=1e-12)
    assert result.curves["n_scored"].iloc[0] == scored.any(axis=0).sum()


@pytest.mark.parametrize("group", [1, 3, 10_000], ids=["one-by-one", "groups-of-3", "all"])
def test_curves_of_many_capacities_equal_the_per_point_formulas(monkeypatch, group):
    # METHODS.md §2 formulas (Efron & Tibshirani 1997), from the stored residuals with numpy:
    # e_i = mean_b d_ib^2, test_mse = mean_i e_i, s_i^2 = var(d_ib, ddof 1), variance = mean s_i^2
    # (bootstrap), test_mse_se = s(e_i) / sqrt(n'); a capacity that fails on some resamples and
    # points never scored by some capacities take the selection path. However the capacities
    # are grouped for reading, the numbers are the same.
    import complexity.decompose as dec

    monkeypatch.setattr(dec, "_GROUP_DOUBLES", group * 12)
    rng = np.random.default_rng(4)
    n, C, B = 12, 7, 9
    acc = PointAccumulator(n, C, B, B, keep_predictions=True)
    for b in range(B):
        test = np.flatnonzero(rng.random(n) < 0.45)
        res = rng.normal(size=(test.size, C)) * np.arange(1, C + 1)
        failures = {5: "failed"} if b % 2 else {}
        res[:, list(failures)] = np.nan
        acc.add(Outcome(b, b, test, res, np.zeros(C), failures))
    layout = SplitLayout("bootstrap", n, float(n), 4.0, True, False)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        curves, _ = curves_table(acc, tuple(range(C)), "degree", noise=0.1, layout=layout)
        d = acc.residuals  # (B, n, C), NaN where not scored
        e = np.nanmean(d**2, axis=0)
        s2 = np.nanvar(d, axis=0, ddof=1)
    for c in range(C):
        seen = np.isfinite(e[:, c])
        assert curves["n_scored"].iloc[c] == seen.sum()
        assert curves["test_mse"].iloc[c] == pytest.approx(e[seen, c].mean(), rel=1e-12)
        se = e[seen, c].std(ddof=1) / np.sqrt(seen.sum())
        assert curves["test_mse_se"].iloc[c] == pytest.approx(se, rel=1e-12)
        two = np.isfinite(s2[:, c])
        assert curves["variance"].iloc[c] == pytest.approx(s2[two, c].mean(), rel=1e-12)
    assert not np.isfinite(e[:, 5]).all()  # the selection path was taken
