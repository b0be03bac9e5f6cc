"""Noise estimators: bad input gives clear errors, NoiseEstimate checks its fields, and no input
array is modified (split from test_noise.py; the estimators' values are tested there).
"""

from __future__ import annotations

import dataclasses
import json

import numpy as np
import pytest

from complexity.noise import (
    NoiseEstimate,
    difference_variance,
    estimate_noise,
    neighbour_variance,
    optimal_difference_variance,
    replicate_variance,
    rice_variance,
)

# ------------------------------------------------------------------------------------------
# Bad input
# ------------------------------------------------------------------------------------------

X4 = np.array([0.0, 1.0, 2.0, 3.0])
Y4 = np.array([1.0, 0.0, 2.0, 1.0])


@pytest.mark.parametrize(
    ("noise", "error", "pattern"),
    [
        (-1.0, ValueError, r"noise must be .*VARIANCE sigma\^2 .*>= 0.*got -1\.0"),
        (float("nan"), ValueError, r"noise must be .*got nan"),
        (float("inf"), ValueError, r"noise must be .*got inf"),
        (True, TypeError, r"noise must be .*got True, a bool"),
        (np.False_, TypeError, r"noise must be .*got np\.False_, a bool"),
        ("rice", ValueError, r"noise must be 'auto', 'replicates', .*got 'rice'"),
        ("Auto", ValueError, r"noise must be .*got 'Auto'"),
        ("neighbors", ValueError, r"noise must be .*'neighbours'.*got 'neighbors'"),
        (None, TypeError, r"noise must be .*got None of type NoneType"),
        ([0.1], TypeError, r"noise must be .*got \[0\.1\] of type list"),
    ],
)
def test_estimate_noise_bad_noise(noise, error, pattern):
    with pytest.raises(error, match=pattern):
        estimate_noise(X4, Y4, noise=noise)


@pytest.mark.parametrize(
    ("X", "y", "error", "pattern"),
    [
        (None, Y4, TypeError, "X must be an array of real numbers; got None"),
        (["a", "b", "c", "d"], Y4, TypeError, "X must be an array of real numbers; got dtype"),
        (X4 + 1j, Y4, TypeError, "X must be an array of real numbers; got dtype complex"),
        (np.zeros((4, 1, 1)), Y4, ValueError, r"X must be 2-D .*got shape \(4, 1, 1\)"),
        (np.zeros((0, 2)), np.zeros(0), ValueError, "X must have at least one row"),
        (np.array([0.0, np.nan, 1, 2]), Y4, ValueError, "X must be finite.*first at row 1"),
        (X4, [1.0, 2.0], ValueError, r"y must have one value per row of x/X \(4\); got 2"),
        (X4, Y4[:, None], ValueError, r"y must be 1-D .*got shape \(4, 1\)"),
        (X4, np.array([1.0, np.inf, 0, 0]), ValueError, "y must be finite.*1 NaN or infinite"),
        (X4, "abcd", TypeError, "y must be an array of real numbers; got 'abcd'"),
    ],
)
def test_estimate_noise_bad_arrays(X, y, error, pattern):
    with pytest.raises(error, match=pattern):
        estimate_noise(X, y)


def test_one_predictor_functions_bad_x():
    for func in (difference_variance, rice_variance, optimal_difference_variance):
        with pytest.raises(ValueError, match=r"x must be one predictor.*got shape \(4, 2\)"):
            func(np.zeros((4, 2)), Y4)
        with pytest.raises(ValueError, match="x must have at least one value"):
            func([], [])


@pytest.mark.parametrize(
    ("call", "pattern"),
    [
        (lambda: difference_variance([0.0, 1.0], [1.0, 2.0]), "at least 3 distinct x values"),
        (lambda: difference_variance([0, 0, 0, 1, 1], np.ones(5)), "got 2 distinct among 5"),
        (lambda: rice_variance([0.0], [1.0]), "rice_variance needs at least 2 points; got 1"),
        (
            lambda: optimal_difference_variance([0.0, 1, 2], [1.0, 2, 3], order=3),
            "optimal_difference_variance of order 3 needs at least 4 points; got 3",
        ),
        (lambda: neighbour_variance([[1.0, 2.0]], [1.0]), "at least 2 rows; got 1"),
        (
            lambda: estimate_noise([[1.0, 2.0]], [1.0]),
            "estimate_noise needs at least 2 rows.*got 1",
        ),
    ],
)
def test_too_few_points(call, pattern):
    with pytest.raises(ValueError, match=pattern):
        call()


@pytest.mark.parametrize(
    ("order", "error", "pattern"),
    [
        (0, ValueError, "order must be 1, 2 or 3; got 0"),
        (4, ValueError, "order must be 1, 2 or 3; got 4"),
        (2.0, TypeError, r"order must be an int in 1, 2, 3; got 2\.0"),
        (True, TypeError, "order must be an int in 1, 2, 3; got True"),
    ],
)
def test_bad_order(order, error, pattern):
    with pytest.raises(error, match=pattern):
        optimal_difference_variance(X4, Y4, order=order)


@pytest.mark.parametrize("decimals", [1.5, True, "3"])
def test_bad_decimals(decimals):
    with pytest.raises(TypeError, match=f"decimals must be None or an int.*got {decimals!r}"):
        replicate_variance(X4, Y4, decimals=decimals)


def test_overflow_is_an_error_not_inf():
    # RULES: never a silent NaN/inf. Squares of 1e200 overflow float64.
    with pytest.raises(ValueError, match="rice_variance overflowed"):
        rice_variance([0.0, 1.0, 2.0], [1e200, -1e200, 1e200])


# ------------------------------------------------------------------------------------------
# NoiseEstimate
# ------------------------------------------------------------------------------------------


def test_noise_estimate_round_trip_through_json():
    for est in (
        NoiseEstimate(2.0000000000000004, "replicates", 3.0, "pure error (df = 3)"),
        NoiseEstimate(0.1 + 0.2, "differences", None, "pseudo-residuals"),
        estimate_noise(None, None, 1e-300),
    ):
        d = est.to_dict()
        assert NoiseEstimate.from_dict(json.loads(json.dumps(d))) == est
        assert NoiseEstimate.from_dict(d) == est


def test_noise_estimate_validation():
    with pytest.raises(ValueError, match=r"value must be a noise variance >= 0; got -0\.5"):
        NoiseEstimate(-0.5, "given", None, "")
    with pytest.raises(ValueError, match=r"method must be one of 'replicates'.*got 'rice'"):
        NoiseEstimate(1.0, "rice", None, "")
    with pytest.raises(ValueError, match=r"df must be None or a number >= 0; got -1\.0"):
        NoiseEstimate(1.0, "replicates", -1, "")
    with pytest.raises(TypeError, match="value must be a real number; got '1'"):
        NoiseEstimate("1", "given", None, "")
    with pytest.raises(ValueError, match="value must be finite; got nan"):
        NoiseEstimate(float("nan"), "given", None, "")
    with pytest.raises(TypeError, match="detail must be a str; got None"):
        NoiseEstimate(1.0, "given", None, None)
    with pytest.raises(ValueError, match=r"missing \['detail'\], unexpected \['extra'\]"):
        NoiseEstimate.from_dict({"value": 1.0, "method": "given", "df": None, "extra": 1})
    with pytest.raises(TypeError, match="d must be a mapping"):
        NoiseEstimate.from_dict([("value", 1.0)])
    est = NoiseEstimate(1, "given", None, "x")
    assert isinstance(est.value, float)
    with pytest.raises(dataclasses.FrozenInstanceError):
        est.value = 2.0


# ------------------------------------------------------------------------------------------
# Inputs never modified
# ------------------------------------------------------------------------------------------


def test_inputs_not_modified():
    # RULES.md: never modify an input array. Unsorted x, ties, float64 (no copy on conversion).
    rng = np.random.default_rng(12)
    x = rng.uniform(0, 1, 30)
    x[3] = x[7]
    X2 = np.column_stack([x, rng.normal(size=30)])
    y = rng.normal(size=30)
    xi = (x * 10).astype(np.int64)
    arrays = (x, X2, y, xi)
    before = [a.tobytes() for a in arrays]
    calls = [
        lambda: replicate_variance(X2, y),
        lambda: replicate_variance(xi, y, decimals=0),
        lambda: difference_variance(x, y),
        lambda: rice_variance(x, y),
        lambda: optimal_difference_variance(x, y, order=3),
        lambda: neighbour_variance(X2, y),
        lambda: neighbour_variance(xi, y),
        lambda: estimate_noise(X2, y),
        lambda: estimate_noise(x, y),
        lambda: estimate_noise(xi, y),
    ]
    for call in calls:
        call()
    assert [a.tobytes() for a in arrays] == before
