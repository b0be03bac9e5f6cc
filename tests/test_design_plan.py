"""Planning the next measurement (complexity.design_plan).

Outside references: least-squares theory, Var(yhat(x0)) = sigma² x0'(X'X)^-1 x0 (Draper & Smith
1998, ch. 3; from memory), computed here independently on the raw power design with numpy;
and a Monte-Carlo simulation of the proposed design with a known truth.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

import complexity as cx
from complexity import design_plan


@pytest.fixture(scope="module")
def sensor():
    X, y = cx.datasets.pressure_sensor()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = cx.sweep(
            cx.PolynomialLadder(range(0, 7)), X, y, plan=cx.Bootstrap(20), random_state=0
        )
    return result, X, y


def _raw_variance(design_x, grid, degree, sigma2):
    """sigma² x0'(X'X)^-1 x0 on raw powers of x/40 (well conditioned here), independently."""
    D = np.vander(design_x / 40.0, degree + 1, increasing=True)
    G = np.vander(grid / 40.0, degree + 1, increasing=True)
    inv = np.linalg.inv(D.T @ D)
    return sigma2 * np.einsum("ij,jk,ik->i", G, inv, G)


@pytest.mark.parametrize("degree", [1, 2, 3, 4])
def test_variance_profile_equals_the_least_squares_formula(sensor, degree):
    result, X, y = sensor
    design = ([-20.0, -5.0, 10.0, 25.0, 40.0, 60.0], 3)
    table = design_plan.variance_profile(result, X, y, design, capacity=degree, n_grid=41)
    grid = table["temperature_c"].to_numpy()
    xd = np.repeat(design[0], 3)
    expected = _raw_variance(xd, grid, degree, result.noise.value)
    np.testing.assert_allclose(table["variance"], expected, rtol=1e-10)
    np.testing.assert_allclose(table["std_error"] ** 2, table["variance"], rtol=1e-14)
    assert table.attrs["sigma2"] == result.noise.value and table.attrs["n_measurements"] == 18


def test_variance_profile_agrees_with_a_simulation_of_the_design(sensor):
    # simulate the proposed design many times with a known truth inside the model and the
    # pilot's noise; the spread of the fitted values at each x0 must match the profile
    # (relative SE of a variance from R draws is sqrt(2/(R-1)): 4 SE is ~9 % at R = 4000)
    result, X, y = sensor
    design = np.repeat([-20.0, 0.0, 20.0, 40.0, 60.0], 4)
    table = design_plan.variance_profile(
        result, X, y, design, capacity=3, x_grid=[-20.0, -10.0, 5.0, 30.0, 60.0]
    )
    rng = np.random.default_rng(3)
    reps, sd = 4000, np.sqrt(result.noise.value)
    truth = 0.1 + 0.01 * design - 1e-4 * design**2 + 2e-6 * design**3
    Y = truth[None, :] + sd * rng.standard_normal((reps, design.size))
    coef = np.polynomial.polynomial.polyfit(design / 40.0, Y.T, 3)  # (4, reps)
    G = np.vander(table["temperature_c"].to_numpy() / 40.0, 4, increasing=True)
    fitted = G @ coef
    simulated = fitted.var(axis=1, ddof=1)
    tol = 4 * np.sqrt(2 / (reps - 1))
    np.testing.assert_allclose(simulated / table["variance"].to_numpy(), 1.0, atol=tol)


def test_expected_error_bias_from_the_working_truth(sensor):
    result, X, y = sensor
    design = ([-20.0, 0.0, 20.0, 40.0, 60.0], 2)
    table = design_plan.expected_error(result, X, y, design, truth_capacity=4, n_grid=81)
    assert list(table.index) == [0, 1, 2, 3, 4]
    # independent: the working truth is the pilot's degree-4 fit (numpy polyfit on x/40); a
    # degree-d fit to its noise-free values on the design has bias = projection - truth
    x, yy = X["temperature_c"].to_numpy() / 40.0, y.to_numpy()
    g = np.polynomial.polynomial.Polynomial.fit(x, yy, 4)
    xd = np.repeat(design[0], 2) / 40.0
    grid = np.linspace(-0.5, 1.5, 81)
    for d in range(5):
        proj = np.polynomial.polynomial.Polynomial.fit(xd, g(xd), d)
        bias_sq = np.mean((proj(grid) - g(grid)) ** 2)
        assert table.loc[d, "bias_sq"] == pytest.approx(bias_sq, rel=1e-7, abs=1e-16)
        var = _raw_variance(xd * 40.0, grid * 40.0, d, result.noise.value).mean()
        assert table.loc[d, "variance"] == pytest.approx(var, rel=1e-9)
    assert table.loc[4, "bias_sq"] < 1e-20  # degree 4 contains the working truth
    np.testing.assert_allclose(
        table["test_mse"], table["bias_sq"] + table["variance"] + table["noise"], rtol=1e-12
    )
    assert "assumption" in table.attrs["working_truth"]


def test_expected_error_stops_where_the_design_cannot_fit(sensor):
    result, X, y = sensor
    table = design_plan.expected_error(result, X, y, ([-20.0, 20.0, 60.0], 5), truth_capacity=6)
    assert list(table.index) == [0, 1, 2]  # three set points fit at most a quadratic


def test_smallest_design_picks_the_fewest_readings_meeting_the_target(sensor):
    result, X, y = sensor
    options = [
        ([-20.0, 20.0, 60.0], 4),
        (np.arange(-20.0, 61.0, 20.0), 2),
        (np.arange(-20.0, 61.0, 10.0), 2),
        (np.arange(-20.0, 61.0, 10.0), 4),
        np.repeat(np.arange(-20.0, 61.0, 5.0), 3),
    ]
    grid = np.linspace(-20.0, 60.0, 201)
    maxima = []
    for design in options:
        xd = np.repeat(*design) if isinstance(design, tuple) else design
        maxima.append(
            np.sqrt(_raw_variance(xd, grid, 4, result.noise.value).max())
            if np.unique(xd).size >= 5
            else np.inf
        )
    target = float(np.sort(maxima)[2]) * 1.0001  # three designs meet it
    table = design_plan.smallest_design(result, X, y, options, target, capacity=4)
    np.testing.assert_allclose(table["max_std_error"], maxima, rtol=1e-9)
    meets = np.array(maxima) <= target
    assert table["meets_target"].tolist() == meets.tolist()
    sizes = table["n_measurements"].to_numpy()
    expected = int(np.flatnonzero(meets)[np.argmin(sizes[meets])])
    assert table.attrs["chosen"] == expected and table["chosen"].sum() == 1
    none = design_plan.smallest_design(result, X, y, options, 1e-6, capacity=4)
    assert none.attrs["chosen"] is None and not none["chosen"].any()


def test_learning_curve_parts_and_trends(sensor):
    result, X, y = sensor
    lc = design_plan.learning_curve(result, X, y, [15, 30, 45], n_repeats=150, random_state=0)
    assert list(lc.columns) == [
        "size",
        "degree",
        "test_mse",
        "bias_sq",
        "variance",
        "noise",
        "n_scored",
    ]
    # per row, test error = (mean prediction - y)² + spread, exactly; so the averages too
    np.testing.assert_allclose(
        lc["test_mse"], lc["bias_sq"] + lc["noise"] + lc["variance"], rtol=1e-10
    )
    for degree, part in lc.groupby("degree"):
        v = part.sort_values("size")["variance"].to_numpy()
        assert v[0] > v[-1], degree  # more data, less variance
    # the constant model's bias does not shrink with data: it stays near its squared bias
    flat = lc[lc["degree"] == 0].set_index("size")["bias_sq"]
    assert flat.min() > 0.5 * flat.max()
    again = design_plan.learning_curve(result, X, y, [15, 30, 45], n_repeats=150, random_state=0)
    pd.testing.assert_frame_equal(lc, again)


def test_bad_arguments_and_extrapolating_designs(sensor):
    result, X, y = sensor
    with pytest.warns(cx.ExtrapolationWarning, match="outside the pilot's measured range"):
        design_plan.variance_profile(result, X, y, ([-40.0, 0.0, 20.0, 60.0, 80.0], 2))
    with pytest.raises(ValueError, match="cannot fit degree 4"):
        design_plan.variance_profile(result, X, y, ([0.0, 20.0], 5), capacity=4)
    with pytest.raises(ValueError, match="target must be a standard error > 0"):
        design_plan.smallest_design(result, X, y, [([0.0, 20.0], 2)], -1.0)
    with pytest.raises(TypeError, match="designs must be a non-empty list"):
        design_plan.smallest_design(result, X, y, [], 0.1)
    with pytest.raises(ValueError, match="sizes must be below n = 51"):
        design_plan.learning_curve(result, X, y, [51])
    with pytest.raises(TypeError, match="replicates must be an int"):
        design_plan.replicated_design([1.0], 2.0)
