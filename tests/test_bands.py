"""Bands, the selection-aware band and inverse prediction (complexity.bands).

Outside references: statsmodels (``OLS(...).fit().get_prediction(...).summary_frame()``) as a
reference library for the textbook bands; NIST StRD Norris (linear) and Pontius (quadratic)
data and certified coefficients (tests/data); known-truth simulations for coverage.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from _nist import load
from scipy import stats

import complexity as cx
from complexity import bands
from complexity.noise import NoiseEstimate
from complexity.result import SweepResult


def _sweep(X, y, degrees, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return cx.sweep(cx.PolynomialLadder(degrees), X, y, random_state=0, **kw)


@pytest.fixture(scope="module")
def sensor():
    X, y = cx.datasets.pressure_sensor()
    return _sweep(X, y, range(0, 7), plan=cx.Bootstrap(20)), X, y


def _result(x, degrees, rule, recommended, sigma2):
    """A bare SweepResult carrying what the bands read (for fast simulations: no sweep)."""
    x = np.asarray(x, dtype=float).reshape(-1, 1)
    return SweepResult(
        curves=pd.DataFrame(index=pd.Index(list(degrees), name="degree")),
        recommended=recommended,
        rule=rule,
        rules=pd.DataFrame(),
        stability=pd.Series(dtype=float),
        noise=NoiseEstimate(value=sigma2, method="given", df=None, detail="known"),
        failures=pd.DataFrame(),
        metadata={
            "ladder": {"kind": "polynomial", "degrees": list(degrees), "domain": None},
            "n_samples": x.shape[0],
            "x_range": [[float(x.min()), float(x.max())]],
        },
    )


# ------------------------------------------------------------------ textbook bands vs statsmodels


@pytest.mark.parametrize("degree", [0, 1, 2, 3, 4])
@pytest.mark.parametrize("interval", ["confidence", "prediction"])
def test_bands_equal_statsmodels(sensor, degree, interval):
    # reference library: statsmodels OLS on the raw power design (x in °C, well conditioned to
    # degree 4 on [-20, 60]) -> get_prediction().summary_frame(); the t-based mean_ci / obs_ci
    result, X, y = sensor
    x_new = np.array([-20.0, -7.5, 0.0, 12.5, 33.0, 47.25, 60.0])
    ours = bands.predict(result, X, y, x_new, capacity=degree, interval=interval, level=0.9)
    x = X["temperature_c"].to_numpy()
    fit = sm.OLS(y.to_numpy(), np.vander(x, degree + 1, increasing=True)).fit()
    ref = fit.get_prediction(np.vander(x_new, degree + 1, increasing=True)).summary_frame(alpha=0.1)
    kind = "mean_ci" if interval == "confidence" else "obs_ci"
    np.testing.assert_allclose(ours["estimate"], ref["mean"], rtol=0, atol=1e-10)
    np.testing.assert_allclose(ours["lower"], ref[f"{kind}_lower"], rtol=0, atol=1e-10)
    np.testing.assert_allclose(ours["upper"], ref[f"{kind}_upper"], rtol=0, atol=1e-10)
    if interval == "confidence":
        np.testing.assert_allclose(ours["std_error"], ref["mean_se"], rtol=1e-9)
    assert ours.attrs["df"] == fit.df_resid


def test_bands_on_nist_pontius_equal_statsmodels():
    # NIST StRD Pontius (quadratic, x up to 3e6): our basis maps x to [-1, 1]; statsmodels gets
    # the raw powers of x / 1e6 (same model space, well conditioned). Certified B0..B2 checked.
    case = load("Pontius")
    X, y = case.X, case.y
    result = _sweep(X, y, range(0, 4), plan=cx.Bootstrap(10))
    x_new = np.linspace(X.min(), X.max(), 9)
    ours = bands.predict(result, X, y, x_new, capacity=2, interval="prediction")
    D = np.vander(X[:, 0] / 1e6, 3, increasing=True)
    ref = sm.OLS(y, D).fit().get_prediction(np.vander(x_new / 1e6, 3, increasing=True))
    frame = ref.summary_frame(alpha=0.05)
    np.testing.assert_allclose(ours["estimate"], frame["mean"], rtol=1e-12)
    np.testing.assert_allclose(ours["upper"], frame["obs_ci_upper"], rtol=1e-11)
    certified = case.coef[0] + case.coef[1] * x_new + case.coef[2] * x_new**2
    np.testing.assert_allclose(ours["estimate"], certified, rtol=1e-12)


def test_sweep_noise_option_uses_the_sweeps_estimate(sensor):
    result, X, y = sensor
    t = bands.predict(result, X, y, [10.0], capacity=4, noise="sweep", interval="prediction")
    fit = bands.predict(result, X, y, [10.0], capacity=4, interval="confidence")
    s2 = result.noise.value
    h = fit["std_error"].iloc[0] ** 2 / fit.attrs["sigma2"]  # z0'(Z'Z)^-1 z0
    q = stats.t.ppf(0.975, result.noise.df)
    assert t.attrs["sigma2"] == s2
    np.testing.assert_allclose(t["upper"] - t["estimate"], q * np.sqrt(s2 * (1 + h)), rtol=1e-12)


# ------------------------------------------------------------------ coverage on known truth


def test_textbook_bands_cover_at_nominal_level():
    # known truth inside the model (a cubic, degree 3 fitted), Gaussian noise: the t-bands are
    # exact, so coverage must be within Monte-Carlo error of 0.95 (SE from per-data-set means,
    # which accounts for the points of one data set being correlated)
    rng = np.random.default_rng(12)
    x = np.linspace(0.0, 10.0, 16)
    truth = lambda v: 2.0 - 0.4 * v + 0.09 * v**2 - 0.004 * v**3  # noqa: E731
    x0 = np.array([0.0, 2.5, 5.0, 8.0, 10.0])
    res = _result(x, range(0, 5), "bic", 3, 0.25)
    reps, hits = 400, {"confidence": [], "prediction": []}
    for _ in range(reps):
        y = truth(x) + 0.5 * rng.standard_normal(x.size)
        for kind in hits:
            t = bands.predict(res, x, y, x0, capacity=3, interval=kind)
            target = truth(x0) + (0.5 * rng.standard_normal(x0.size) if kind == "prediction" else 0)
            hits[kind].append(((t["lower"] <= target) & (target <= t["upper"])).mean())
    for kind, h in hits.items():
        mean, se = np.mean(h), np.std(h, ddof=1) / np.sqrt(reps)
        assert abs(mean - 0.95) < 3.5 * se + 1e-3, (kind, mean, se)


@pytest.mark.slow
def test_selection_band_beats_the_naive_band_when_the_choice_is_unstable(capsys):
    # known truth 1 + 0.5 x + 0.3 x² on 30 equispaced x in [-1, 1], noise SD 0.5, degree chosen
    # by BIC from 0..4: BIC picks 1 or 2 (unstable). The naive band is the confidence band at
    # the degree BIC picked on the data, as if it had been fixed in advance. Efron (2014)'s
    # smoothed bootstrap band includes the choice; it must cover the truth more often. Both
    # coverages are printed (the issue asks for the selection band's coverage to be reported).
    rng = np.random.default_rng(5)
    n, sd = 30, 0.5
    x = np.linspace(-1.0, 1.0, n)
    truth = lambda v: 1.0 + 0.5 * v + 0.3 * v**2  # noqa: E731
    x0 = np.array([-1.0, -0.5, 0.0, 0.5, 1.0])

    def bic_pick(y):  # independent of the library: BIC from numpy least squares
        values = []
        for d in range(5):
            D = np.vander(x, d + 1, increasing=True)
            r = y - D @ np.linalg.lstsq(D, y, rcond=None)[0]
            values.append(n * np.log(r @ r / n) + np.log(n) * (d + 1))
        return int(np.argmin(values))

    naive, chosen, picks = [], [], []
    for rep in range(120):
        y = truth(x) + sd * rng.standard_normal(n)
        d = bic_pick(y)
        picks.append(d)
        res = _result(x, range(0, 5), "bic", d, sd**2)
        a = bands.predict(res, x, y, x0, interval="confidence")
        b = bands.predict(res, x, y, x0, interval="selection", n_boot=200, random_state=rep)
        f0 = truth(x0)
        naive.append(((a["lower"] <= f0) & (f0 <= a["upper"])).mean())
        chosen.append(((b["lower"] <= f0) & (f0 <= b["upper"])).mean())
    shares = np.bincount(picks, minlength=5) / len(picks)
    assert shares.max() < 0.85, shares  # the choice really is unstable here
    diff = np.array(chosen) - np.array(naive)
    se = diff.std(ddof=1) / np.sqrt(diff.size)
    with capsys.disabled():
        print(
            f"\ncoverage of f at nominal 0.95: naive {np.mean(naive):.3f}, selection-aware "
            f"{np.mean(chosen):.3f} (paired difference {diff.mean():.3f} ± {se:.3f}); "
            f"BIC picks {shares.round(2).tolist()}"
        )
    assert diff.mean() > 2 * se
    assert np.mean(chosen) > np.mean(naive)


def test_selection_band_reports_its_replicate_choices(sensor):
    result, X, y = sensor
    t = bands.predict(result, X, y, [0.0, 30.0], interval="selection", n_boot=200, random_state=1)
    shares = t.attrs["share_chosen"]
    assert set(shares) == set(range(0, 7)) and abs(sum(shares.values()) - 1) < 1e-9
    assert t.attrs["rule"] == result.rule
    assert (t["lower"] < t["estimate"]).all() and (t["estimate"] < t["upper"]).all()
    again = bands.predict(
        result, X, y, [0.0, 30.0], interval="selection", n_boot=200, random_state=1
    )
    pd.testing.assert_frame_equal(t, again)  # seeded: reproducible


@pytest.mark.parametrize("rule", ["min", "one-se", "loocv", "gcv", "aic", "aicc", "bic", "cp"])
def test_selection_band_runs_for_every_rule(rule):
    x = np.linspace(0, 1, 25)
    y = np.sin(3 * x) + 0.05 * np.random.default_rng(0).standard_normal(25)
    t = bands.predict(
        _result(x, range(0, 6), rule, 3, 0.0025),
        x,
        y,
        [0.2, 0.8],
        interval="selection",
        n_boot=100,
        random_state=0,
    )
    assert np.isfinite(t[["estimate", "lower", "upper"]].to_numpy()).all()


# ------------------------------------------------------------------ range, inputs


def test_outside_the_measured_range_warns_or_refuses(sensor):
    result, X, y = sensor
    with pytest.warns(cx.ExtrapolationWarning, match="outside the measured range"):
        t = bands.predict(result, X, y, [-30.0, 10.0, 70.0])
    assert t["in_range"].tolist() == [False, True, False]
    with pytest.raises(ValueError, match="outside the measured range"):
        bands.predict(result, X, y, [70.0], outside="raise")


def test_bad_arguments_are_named(sensor):
    result, X, y = sensor
    with pytest.raises(ValueError, match="interval must be one of"):
        bands.predict(result, X, y, [1.0], interval="tolerance")
    with pytest.raises(ValueError, match="level must lie strictly between 0 and 1"):
        bands.predict(result, X, y, [1.0], level=95)
    with pytest.raises(ValueError, match=r"capacity must be one of the swept degrees \[0, 1"):
        bands.predict(result, X, y, [1.0], capacity=9)
    with pytest.raises(ValueError, match="X has 50 rows but the sweep was run on 51"):
        bands.predict(result, X.iloc[:50], y.iloc[:50], [1.0])
    with pytest.raises(ValueError, match="the sweep's data spanned"):
        bands.predict(result, X + 1.0, y, [1.0])
    with pytest.raises(TypeError, match="result must be the SweepResult"):
        bands.predict("result", X, y, [1.0])
    feature = _sweep(X, y, range(0, 2), plan=cx.Bootstrap(5))
    feature.metadata["ladder"] = {"kind": "feature"}
    with pytest.raises(ValueError, match="need a PolynomialLadder sweep"):
        bands.predict(feature, X, y, [1.0])


def test_inputs_are_not_modified(sensor):
    result, X, y = sensor
    x_new = np.array([1.0, 2.0])
    Xc, yc, xc = X.copy(), y.copy(), x_new.copy()
    bands.predict(result, X, y, x_new, interval="selection", n_boot=50, random_state=0)
    bands.inverse_predict(result, X, y, np.array([0.3]), capacity=4)
    pd.testing.assert_frame_equal(X, Xc)
    pd.testing.assert_series_equal(y, yc)
    np.testing.assert_array_equal(x_new, xc)


# ------------------------------------------------------------------ inverse prediction


def test_inverse_prediction_linear_closed_form_on_norris():
    # NIST StRD Norris (36 points, straight line). Hand-worked closed form (Draper & Smith ch. 3,
    # inverse estimation; derived here): with yhat = ybar + b u, u = x - xbar, d = y0 - ybar,
    # c = t² s², the bounds solve (d - b u)² = c (1 + 1/n + u²/Sxx), i.e.
    #   (b² - c/Sxx) u² - 2 b d u + d² - c (1 + 1/n) = 0,
    # and the estimate is u = d / b. The slope is certified (StRD B1); t on n - 2 df.
    case = load("Norris")
    x, y = case.X[:, 0], case.y
    result = _sweep(case.X, y, range(0, 3), plan=cx.Bootstrap(10))
    n = x.size
    b = float(case.coef[1])
    xbar, ybar = x.mean(), y.mean()
    sxx = np.sum((x - xbar) ** 2)
    s2 = case.residual_sd**2
    c = stats.t.ppf(0.975, n - 2) ** 2 * s2
    for y0 in (150.0, 400.0, 600.0):
        d = y0 - ybar
        A, B, C = b**2 - c / sxx, -2 * b * d, d**2 - c * (1 + 1 / n)
        roots = np.sort((-B + np.array([-1, 1]) * np.sqrt(B**2 - 4 * A * C)) / (2 * A)) + xbar
        t = bands.inverse_predict(result, case.X, y, y0, capacity=1)
        assert t.loc[0, "estimate"] == pytest.approx(xbar + d / b, rel=1e-11)
        assert t.loc[0, "lower"] == pytest.approx(roots[0], rel=1e-9)
        assert t.loc[0, "upper"] == pytest.approx(roots[1], rel=1e-9)


def test_inverse_prediction_quadratic_pontius_against_statsmodels():
    # NIST StRD Pontius (load cell, quadratic), the data of the e-Handbook's load-cell
    # calibration case study (§4.6.2, from memory). The estimate solves the certified quadratic
    # = y0; each bound is where statsmodels' 95% prediction band crosses y0.
    case = load("Pontius")
    X, y = case.X, case.y
    result = _sweep(X, y, range(0, 4), plan=cx.Bootstrap(10))
    y0 = 1.5
    t = bands.inverse_predict(result, X, y, y0, capacity=2)
    b0, b1, b2 = case.coef
    root = (-b1 + np.sqrt(b1**2 - 4 * b2 * (b0 - y0))) / (2 * b2)
    assert t.loc[0, "estimate"] == pytest.approx(root, rel=1e-10)
    fit = sm.OLS(y, np.vander(X[:, 0] / 1e6, 3, increasing=True)).fit()
    ends = np.array([t.loc[0, "lower"], t.loc[0, "upper"]])
    frame = fit.get_prediction(np.vander(ends / 1e6, 3, increasing=True)).summary_frame(alpha=0.05)
    # rising curve: the lower x bound is where the upper band meets y0, and vice versa
    assert frame["obs_ci_upper"].iloc[0] == pytest.approx(y0, rel=1e-10)
    assert frame["obs_ci_lower"].iloc[1] == pytest.approx(y0, rel=1e-10)


def test_inverse_prediction_refuses_ambiguous_and_out_of_range_readings():
    x = np.repeat(np.linspace(-1.0, 1.0, 11), 2)
    y = x**2 + 0.01 * np.random.default_rng(3).standard_normal(x.size)
    result = _result(x, range(0, 4), "bic", 2, 1e-4)
    with pytest.raises(ValueError, match="ambiguous.*2 times"):
        bands.inverse_predict(result, x, y, 0.5, capacity=2)
    with pytest.raises(ValueError, match="outside the values the degree-2 curve takes"):
        bands.inverse_predict(result, x, y, 3.0, capacity=2)
    rising = 2.0 * x + 0.01 * np.random.default_rng(4).standard_normal(x.size)
    line = _result(x, range(0, 3), "bic", 1, 1e-4)
    with pytest.raises(ValueError, match="runs past the end of the measured range"):
        bands.inverse_predict(line, x, rising, 1.995, capacity=1)
    with pytest.raises(ValueError, match="one predictor"):
        X2 = np.column_stack([x, x[::-1] + 0.1 * np.arange(x.size)])
        res2 = _result(x, range(0, 2), "bic", 1, 1e-4)
        res2.metadata["x_range"] = [[float(c.min()), float(c.max())] for c in X2.T]
        bands.inverse_predict(res2, X2, rising, 0.0, capacity=1)


def test_inverse_prediction_of_a_mean_of_readings_is_narrower(sensor):
    result, X, y = sensor
    one = bands.inverse_predict(result, X, y, [0.3, 0.5], capacity=4)
    four = bands.inverse_predict(result, X, y, [0.3, 0.5], capacity=4, n_readings=4)
    np.testing.assert_allclose(one["estimate"], four["estimate"])
    assert ((four["upper"] - four["lower"]) < (one["upper"] - one["lower"])).all()
    assert "reference standards" in one.attrs["caution"]


def test_a_saved_and_reloaded_result_gives_the_same_bands(sensor, tmp_path):
    result, X, y = sensor
    loaded = cx.load_result(result.save(tmp_path / "sweep.json"))
    for kind in ("confidence", "prediction"):
        a = bands.predict(result, X, y, [0.0, 25.0], capacity=3, interval=kind)
        b = bands.predict(loaded, X, y, [0.0, 25.0], capacity=3, interval=kind)
        pd.testing.assert_frame_equal(a, b)
