"""Profiles of squared bias, variance and test error along the range (complexity.profiles).

Outside reference: known-truth data. With nearly no noise, the out-of-bag squared bias of a too
simple degree in a bin is the squared error of least-squares projections of the known truth
(computed here with numpy, independently); with the truth inside the model it is ~0.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

import complexity as cx
from complexity import profiles


def _sweep(X, y, degrees, noise="auto"):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return cx.sweep(
            cx.PolynomialLadder(degrees), X, y, plan=cx.Bootstrap(20), noise=noise, random_state=0
        )


@pytest.fixture(scope="module")
def sensor():
    X, y = cx.datasets.pressure_sensor()
    return _sweep(X, y, range(0, 7)), X, y


def test_bins_have_equal_counts_and_the_parts_add_up(sensor):
    result, X, y = sensor
    t = profiles.profile(result, X, y, capacity=4, n_bins=5, n_boot=150, random_state=0)
    assert sorted(set(t["degree"])) == [3, 4, 5]
    for _, part in t.groupby("degree"):
        assert part["count"].sum() == 51
        # 17 set points x 3 readings; ties stay together, so counts differ by at most a group
        assert part["count"].max() - part["count"].min() <= 3
        assert (part["low"].to_numpy()[1:] > part["high"].to_numpy()[:-1]).all()
    np.testing.assert_allclose(t["test_mse"], t["bias_sq_plus_noise"] + t["variance"], rtol=1e-10)
    np.testing.assert_allclose(t["bias_sq"], t["bias_sq_plus_noise"] - result.noise.value)
    assert "reference standards" in t.attrs["caution"]


def test_bias_profile_matches_known_truth():
    # truth f(x) = x³ on 40 points in [-1, 1], noise SD 1e-4 (given to the sweep as 1e-8):
    # the out-of-bag fits of degree 1 miss f by about the least-squares projection error,
    # which is largest at the ends; degree 3 contains f, so its bias is at the noise level
    x = np.linspace(-1.0, 1.0, 40)
    y = x**3 + 1e-4 * np.random.default_rng(1).standard_normal(x.size)
    result = _sweep(x, y, range(0, 5), noise=1e-8)
    t = profiles.profile(
        result, x, y, capacity=2, neighbours=1, n_bins=4, n_boot=400, random_state=0
    )
    line = np.polynomial.polynomial.Polynomial.fit(x, x**3, 1)
    ends = t[t["degree"] == 1].set_index("bin")
    for b, row in ends.iterrows():
        inside = (x >= row["low"]) & (x <= row["high"])
        projected = np.mean((line(x[inside]) - x[inside] ** 3) ** 2)
        # OOB fits differ from the full-data projection: a loose tolerance, common practice
        assert row["bias_sq"] == pytest.approx(projected, rel=0.35), b
    bias = ends["bias_sq"].to_numpy()
    assert bias[0] > bias[1] and bias[3] > bias[2]  # weakest at the ends
    cubic = t[t["degree"] == 3]
    assert cubic["bias_sq_plus_noise"].max() < 1e-6
    assert (cubic["variance"] < 1e-6).all()


def test_several_predictors_bin_along_fitted_or_a_column():
    rng = np.random.default_rng(2)
    X = pd.DataFrame({"a": rng.uniform(0, 1, 60), "b": rng.uniform(0, 1, 60)})
    y = X["a"] + X["b"] ** 2 + 0.05 * rng.standard_normal(60)
    result = _sweep(X, y, range(0, 4))
    t = profiles.profile(result, X, y, capacity=2, n_bins=4, n_boot=60, random_state=0)
    assert t.attrs["along"] == "fitted value"
    by_b = profiles.profile(
        result, X, y, capacity=2, n_bins=4, along="b", n_boot=60, random_state=0
    )
    assert by_b.attrs["along"] == "b"
    assert by_b["high"].max() == pytest.approx(X["b"].max())
    with pytest.raises(ValueError, match="along must be 'fitted', a column name"):
        profiles.profile(result, X, y, along="c")


def test_bad_arguments(sensor):
    result, X, y = sensor
    with pytest.raises(ValueError, match="n_bins must be at most the number of rows"):
        profiles.profile(result, X, y, n_bins=60)
    with pytest.raises(TypeError, match="neighbours must be an int"):
        profiles.profile(result, X, y, neighbours=1.5)
    with pytest.raises(TypeError, match="table must be the DataFrame returned by profiles"):
        profiles.plot_profile(pd.DataFrame({"x": [1]}))


def test_figure_has_three_panels(sensor):
    pytest.importorskip("matplotlib")
    result, X, y = sensor
    t = profiles.profile(result, X, y, n_boot=50, random_state=0)
    fig = profiles.plot_profile(t, y_units="kPa")
    assert [a.get_title() for a in fig.axes] == [
        "test error (out of bag)",
        "squared bias",
        "variance",
    ]
    assert len(fig.axes[0].get_lines()) == 3  # the recommendation and its two neighbours
