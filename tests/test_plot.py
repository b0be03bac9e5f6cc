"""Figures: each view renders to PNG with the expected axes, lines, labels and markers."""

from __future__ import annotations

import dataclasses
import io
import sys
import warnings

import matplotlib

matplotlib.use("Agg")

import numpy as np
import pandas as pd
import pytest
from matplotlib.axes import Axes
from matplotlib.collections import PolyCollection
from matplotlib.figure import Figure
from matplotlib.image import imread
from sklearn.neighbors import KNeighborsRegressor

import complexity as cx
from complexity.plot import VIEWS, figure_png, figures, fits_available, has_diagnostics, plot

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification (ISO/IEC 15948), section 5.2


@pytest.fixture(scope="module")
def data():
    return cx.datasets.pressure_sensor()


@pytest.fixture(scope="module")
def result(data):
    X, y = data
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        return cx.sweep(
            cx.PolynomialLadder(range(0, 8)), X, y, plan=cx.Bootstrap(20), random_state=3
        )


def _without_diagnostics(result):
    curves = result.curves.drop(columns=[c for c in result.curves if "cond" in c or "coef" in c])
    return dataclasses.replace(result, curves=curves)


def _by_gid(ax: Axes, gid: str):
    return [a for a in ax.get_children() if getattr(a, "get_gid", lambda: None)() == gid]


def _line(ax: Axes, gid: str):
    lines = [ln for ln in ax.get_lines() if ln.get_gid() == gid]
    assert len(lines) == 1, f"expected one line with gid {gid!r}, got {len(lines)}"
    return lines[0]


def _renders(fig: Figure) -> np.ndarray:
    png = figure_png(fig)
    assert png.startswith(PNG_SIGNATURE)
    image = imread(io.BytesIO(png), format="png")
    assert image.ndim == 3 and image.shape[0] > 200 and image.shape[1] > 300
    return image


def _legend_texts(ax: Axes) -> list[str]:
    # our own figures put the legend under the plot (a figure legend); in a user's axes it is
    # the axes' legend
    legends = [ax.get_legend()] if ax.get_legend() is not None else list(ax.figure.legends)
    assert len(legends) == 1
    return [t.get_text() for t in legends[0].get_texts()]


def test_errors_view(result):
    fig = plot(result, "errors", y_units="kPa")
    _renders(fig)
    assert len(fig.axes) == 1
    ax = fig.axes[0]
    caps = np.array(result.curves.index, dtype=float)
    train, test = _line(ax, "train"), _line(ax, "test")
    np.testing.assert_array_equal(train.get_xdata(), caps)
    np.testing.assert_array_equal(train.get_ydata(), result.curves["train_mse"].to_numpy())
    np.testing.assert_array_equal(test.get_ydata(), result.curves["test_mse"].to_numpy())
    # the band spans test ± one standard error
    band = _by_gid(ax, "test-band")
    assert len(band) == 1 and isinstance(band[0], PolyCollection)
    verts = band[0].get_paths()[0].vertices
    upper = (result.curves["test_mse"] + result.curves["test_mse_se"]).to_numpy()
    assert np.isclose(verts[:, 1].max(), upper.max())
    # the recommended marker sits at result.recommended
    marker = _line(ax, "recommended")
    assert list(marker.get_xdata()) == [result.recommended] * 2
    point = _line(ax, "recommended-point")
    assert point.get_xdata()[0] == result.recommended
    assert point.get_ydata()[0] == result.curves.loc[result.recommended, "test_mse"]
    # one-standard-error rule (Breiman et al. 1984, sec. 3.4.3): the limit is min + its SE
    limit = _line(ax, "one-se-limit").get_ydata()[0]
    best = result.curves["test_mse"].idxmin()
    assert limit == pytest.approx(
        result.curves.loc[best, "test_mse"] + result.curves.loc[best, "test_mse_se"]
    )
    assert ax.get_xlabel() == "polynomial degree"
    assert ax.get_ylabel() == "mean squared error (kPa²)"
    texts = _legend_texts(ax)
    assert f"recommended polynomial degree: {result.recommended} (rule one-se)" in texts
    assert "±1 standard error" in texts and "test error (out-of-bag)" in texts


def test_errors_view_log_axis_follows_the_spread(result):
    # the demo's degree-0 error is ~100x the rest: "auto" picks a log axis; log=False keeps linear
    assert plot(result, "errors").axes[0].get_yscale() == "log"
    assert plot(result, "errors", log=False).axes[0].get_yscale() == "linear"


def test_parts_view_stacks_noise_bias_variance(result):
    fig = plot(result, "parts", clip=False)
    _renders(fig)
    ax = fig.axes[0]
    curves = result.curves
    noise = [p for p in ax.patches if p.get_gid() is None]
    assert not noise  # every bar belongs to a labelled part
    containers = {c.get_label(): c for c in ax.containers}
    # the bootstrap adds the out-of-bag models' extra variance, so the stack meets the marker
    assert set(containers) == {"noise", "squared bias", "variance", "out-of-bag excess"}
    heights = {k: np.array([p.get_height() for p in c.patches]) for k, c in containers.items()}
    bottoms = {k: np.array([p.get_y() for p in c.patches]) for k, c in containers.items()}
    np.testing.assert_allclose(heights["noise"], curves["noise"])
    np.testing.assert_allclose(heights["squared bias"], curves["bias_sq"].clip(lower=0))
    np.testing.assert_allclose(heights["variance"], curves["variance"])
    np.testing.assert_allclose(
        bottoms["variance"], curves["noise"] + curves["bias_sq"].clip(lower=0)
    )
    np.testing.assert_allclose(heights["out-of-bag excess"], curves["oob_excess"])
    top = bottoms["out-of-bag excess"] + heights["out-of-bag excess"]
    ok = curves["bias_sq"] >= 0  # there the stack is exactly test_mse (decompose.relation)
    np.testing.assert_allclose(top[ok], curves["test_mse"][ok], rtol=1e-9)
    assert list(_line(ax, "recommended").get_xdata()) == [result.recommended] * 2
    assert ax.get_title(loc="left") == "Where the test error comes from"


def test_parts_view_clips_the_tall_bars_and_labels_them(result):
    ax = plot(result, "parts").axes[0]
    totals = np.maximum(
        result.curves[["noise", "variance"]].sum(axis=1) + result.curves["bias_sq"].clip(lower=0),
        result.curves["test_mse"],
    )
    top = ax.get_ylim()[1]
    assert top == pytest.approx(3 * totals.min())
    labels = [t.get_text() for t in ax.texts if "↑" in t.get_text()]
    assert len(labels) == int((totals > top).sum()) >= 1  # degree 0 is far above the rest


def test_fits_view_draws_the_least_squares_polynomial(result, data):
    X, y = data
    fig = plot(result, "fits", X=X, y=y, x_units="°C", y_units="kPa", band_resamples=30)
    _renders(fig)
    ax = fig.axes[0]
    rec = result.recommended
    fitted = _line(ax, "fit-recommended")
    grid = fitted.get_xdata()
    # reference: numpy's own least-squares polynomial fit of the same degree
    reference = np.polynomial.Polynomial.fit(X["temperature_c"], y, deg=rec)(grid)
    np.testing.assert_allclose(fitted.get_ydata(), reference, rtol=1e-9, atol=1e-9)
    for gid, degree in (("fit--1", rec - 1), ("fit-+1", rec + 1)):
        ref = np.polynomial.Polynomial.fit(X["temperature_c"], y, deg=degree)(grid)
        np.testing.assert_allclose(_line(ax, gid).get_ydata(), ref, rtol=1e-9, atol=1e-9)
    points = _line(ax, "data")
    assert len(points.get_xdata()) == len(y)
    # the measured range is -20..60 °C; everything beyond it is shaded
    spans = _by_gid(ax, "outside-range")
    assert len(spans) == 2
    extents = sorted(
        tuple(np.round(s.get_path().get_extents(s.get_transform() - ax.transData).intervalx, 9))
        for s in spans
    )
    assert extents[0][1] == pytest.approx(-20.0) and extents[1][0] == pytest.approx(60.0)
    assert extents[0][0] < -20.0 and extents[1][1] > 60.0
    assert len(_by_gid(ax, "band")) == 1
    assert ax.get_xlabel() == "temperature_c (°C)"
    assert ax.get_ylabel() == "offset_kpa (kPa)"
    texts = _legend_texts(ax)
    assert f"polynomial degree {rec} (recommended)" in texts
    assert "outside the measured range" in texts


def test_fits_view_band_is_reproducible(result, data):
    X, y = data
    a = _by_gid(plot(result, "fits", X=X, y=y, band_resamples=10).axes[0], "band")[0]
    b = _by_gid(plot(result, "fits", X=X, y=y, band_resamples=10).axes[0], "band")[0]
    np.testing.assert_array_equal(a.get_paths()[0].vertices, b.get_paths()[0].vertices)


def test_fits_view_needs_one_predictor_and_the_data(result, data):
    X, y = data
    with pytest.raises(ValueError, match="needs the data"):
        plot(result, "fits")
    two = pd.DataFrame({"a": X["temperature_c"], "b": X["temperature_c"] ** 2})
    with pytest.raises(ValueError, match="one predictor"):
        plot(result, "fits", X=two, y=y)
    with pytest.raises(ValueError, match="51"):
        plot(result, "fits", X=X.iloc[:10], y=y.iloc[:10])
    with pytest.raises(TypeError, match="ladder"):
        plot(result, "fits", X=X, y=y, ladder="quadratic")
    assert fits_available(result, X) and not fits_available(result, two)


def test_stability_view(result):
    fig = plot(result, "stability")
    _renders(fig)
    ax = fig.axes[0]
    bars = ax.containers[0].patches
    np.testing.assert_allclose([b.get_height() for b in bars], result.stability.to_numpy() * 100)
    marked = [p for p in ax.patches if p.get_gid() == "recommended"]
    assert len(marked) == 1
    assert marked[0].get_x() + marked[0].get_width() / 2 == pytest.approx(result.recommended)
    assert ax.get_ylim() == (0, 100)
    assert ax.get_ylabel() == "replicates choosing it (%)"


def test_conditioning_view_uses_recorded_diagnostics(result, data):
    X, _ = data
    base = _without_diagnostics(result)
    assert not has_diagnostics(base)
    with pytest.raises(ValueError, match="exact engine"):
        plot(base, "conditioning")
    # real diagnostics of the raw-power design: numpy's 2-norm condition number per degree,
    # and the largest |coefficient| of numpy's least-squares fit
    x = X["temperature_c"].to_numpy()
    cond = [np.linalg.cond(np.vander(x, d + 1)) for d in base.curves.index]
    _, y = data
    size = [np.abs(np.polynomial.polynomial.polyfit(x, y, d)).max() for d in base.curves.index]
    curves = base.curves.assign(condition_number=cond, max_abs_coef=size)
    fig = plot(dataclasses.replace(base, curves=curves), "conditioning")
    _renders(fig)
    assert len(fig.axes) == 2  # condition number and coefficient size on twin axes
    np.testing.assert_allclose(_line(fig.axes[0], "condition").get_ydata(), cond)
    np.testing.assert_allclose(_line(fig.axes[1], "coefficient-size").get_ydata(), size)
    assert fig.axes[0].get_yscale() == "log"
    assert list(_line(fig.axes[0], "recommended").get_xdata()) == [result.recommended] * 2
    # only one of the two recorded: one axis
    only = dataclasses.replace(base, curves=base.curves.assign(condition_number=cond))
    assert len(plot(only, "conditioning").axes) == 1


def test_draws_into_given_axes(result):
    fig = Figure()
    ax1, ax2 = fig.subplots(1, 2)
    assert plot(result, "errors", ax=ax1) is fig
    assert plot(result, "stability", ax=ax2) is fig
    assert len(fig.axes) == 2 and ax1.get_lines()
    assert ax1.get_legend() is not None and not fig.legends  # legends stay inside the user's axes
    with pytest.raises(TypeError, match="ax must be a matplotlib Axes"):
        plot(result, "errors", ax="left")


def test_result_plot_method_and_loaded_result(result, tmp_path):
    loaded = cx.load_result(result.save(tmp_path / "r.json"))
    a = result.plot("errors").axes[0]
    b = loaded.plot("errors").axes[0]
    np.testing.assert_array_equal(_line(a, "test").get_ydata(), _line(b, "test").get_ydata())
    assert list(_line(b, "recommended").get_xdata()) == [loaded.recommended] * 2


def test_non_numeric_capacity_order_uses_positions(data):
    X, y = data
    ladder = cx.ParamLadder(KNeighborsRegressor(), "n_neighbors", [1, 4, 16], simpler="high")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        r = cx.sweep(ladder, X, y, plan=cx.Bootstrap(8), random_state=0)
    ax = plot(r, "errors").axes[0]
    # capacities run 16, 4, 1 (simplest first), so x is the position with the value as label
    assert [t.get_text() for t in ax.get_xticklabels()] == ["16", "4", "1"]
    position = list(r.curves.index).index(r.recommended)
    assert list(_line(ax, "recommended").get_xdata()) == [position] * 2
    assert ax.get_xlabel() == "n_neighbors"
    with pytest.raises(ValueError, match="pass the ladder"):
        plot(r, "fits", X=X, y=y)
    fig = plot(r, "fits", X=X, y=y, ladder=ladder, band_resamples=5)
    assert _line(fig.axes[0], "fit-recommended")


def test_figures_lists_the_views_that_apply(result, data):
    X, y = data
    assert list(figures(_without_diagnostics(result))) == ["errors", "parts", "stability"]
    assert list(figures(_without_diagnostics(result), X=X, y=y, band_resamples=5)) == [
        "errors",
        "parts",
        "fits",
        "stability",
    ]


def test_bad_view_and_result(result):
    with pytest.raises(ValueError, match="view"):
        plot(result, "histogram")
    with pytest.raises(TypeError, match="SweepResult"):
        plot({"curves": None})
    assert set(VIEWS) == {"errors", "parts", "fits", "stability", "conditioning"}


def test_missing_matplotlib_names_the_extra(result, monkeypatch):
    for name in [m for m in sys.modules if m == "matplotlib" or m.startswith("matplotlib.")]:
        monkeypatch.setitem(sys.modules, name, None)
    with pytest.raises(ImportError, match=r'pip install "complexity\[plot\]"'):
        plot(result)


def test_conditioning_view_of_an_exact_sweep(result):
    # the exact least-squares engine records conditioning and coefficient size per degree
    assert result.metadata["engine"] == "exact" and has_diagnostics(result)
    fig = plot(result, "conditioning")
    _renders(fig)
    np.testing.assert_array_equal(
        _line(fig.axes[0], "condition").get_ydata(), result.curves["condition_number"].to_numpy()
    )
    np.testing.assert_array_equal(
        _line(fig.axes[1], "coefficient-size").get_ydata(),
        result.curves["max_abs_coefficient"].to_numpy(),
    )
    assert "conditioning" in figures(result, views=["conditioning", "errors"])


def _exploding(result):
    """The fixture's curves with errors that explode at the top (as near-interpolating fits do)
    and a training error that reaches exactly zero there."""
    curves = result.curves.copy()
    last = curves.index[-2:]
    curves.loc[last, "test_mse"] = [1e8, 1e12]
    curves.loc[last, "test_mse_se"] = [1e7, 1e11]
    curves.loc[curves.index[-1], "train_mse"] = 0.0
    return dataclasses.replace(result, curves=curves)


def test_errors_view_keeps_the_region_of_the_choice_readable(result):
    # issue 12 item 8: errors of 1e8..1e12 must not squash the curve near its minimum
    r = _exploding(result)
    ax = plot(r, "errors").axes[0]
    assert ax.get_yscale() == "log"
    low = r.curves["test_mse"].min()
    bottom, top = ax.get_ylim()
    assert top == pytest.approx(low * 1e3) and bottom == pytest.approx(low / 1e3)
    # the lines still carry the true values; the off-scale points are marked at the edges
    np.testing.assert_array_equal(_line(ax, "test").get_ydata(), r.curves["test_mse"].to_numpy())
    up = [ln for ln in ax.get_lines() if ln.get_gid() == "off-scale-above"]
    assert len(up) == 1 and list(up[0].get_xdata()) == list(r.curves.index[-2:])
    assert set(up[0].get_ydata()) == {top}
    down = [ln for ln in ax.get_lines() if ln.get_gid() == "off-scale-below"]
    assert len(down) == 1 and list(down[0].get_xdata()) == [r.curves.index[-1]]
    text = " ".join(_legend_texts(ax)).replace("\n", " ")
    assert "test error above the axis at polynomial degree 6, 7 (up to 1e+12)" in text
    assert "training error below the axis at polynomial degree 7 (down to 0)" in text
    # clip=False shows everything (and marks nothing)
    full = plot(r, "errors", clip=False).axes[0]
    assert full.get_ylim()[1] > 1e12
    assert not [ln for ln in full.get_lines() if str(ln.get_gid()).startswith("off-scale")]


def test_errors_view_of_an_ordinary_sweep_is_not_cut(result):
    ax = plot(result, "errors").axes[0]
    assert not [ln for ln in ax.get_lines() if str(ln.get_gid()).startswith("off-scale")]
    values = result.curves[["train_mse", "test_mse"]].to_numpy()
    assert ax.get_ylim()[0] < values.min() and ax.get_ylim()[1] > values.max()


def test_parts_view_flags_squared_bias_estimated_below_zero(data):
    # issue 12 item 8: a negative bias_sq is drawn as 0, and the figure says so where it happens
    X, y = data
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        result = cx.sweep(
            cx.PolynomialLadder(range(0, 8)), X, y, plan=cx.Bootstrap(50), random_state=0
        )
    negative = result.curves.index[result.curves["bias_sq"] < 0]
    assert len(negative) >= 1  # this sweep has some (its CapacityWarning says so)
    ax = plot(result, "parts").axes[0]
    marks = _line(ax, "bias-below-zero")
    assert list(marks.get_xdata()) == list(negative)
    np.testing.assert_allclose(marks.get_ydata(), result.curves.loc[negative, "noise"])
    label = marks.get_label()
    assert "squared bias estimated below zero at polynomial degree" in label
    assert ", ".join(str(c) for c in negative) in label
    assert "shown as 0" in label and "noise and variance estimates together exceed" in label
    assert label.replace("\n", " ") in [t.replace("\n", " ") for t in _legend_texts(ax)]
    clean = result.curves.assign(bias_sq=result.curves["bias_sq"].clip(lower=0))
    ax = plot(dataclasses.replace(result, curves=clean), "parts").axes[0]
    assert not [ln for ln in ax.get_lines() if ln.get_gid() == "bias-below-zero"]


def test_conditioning_view_compares_with_the_raw_power_design(result, data):
    # issue 12 item 7: beside the stable basis, what 1, x, x², ... on the user's x would have had
    X, _ = data
    ax = plot(result, "conditioning", X=X).axes[0]
    raw = _line(ax, "raw-condition")
    x = X["temperature_c"].to_numpy()
    expected = []
    for d in result.curves.index:  # numpy's SVD of the unit-length-scaled Vandermonde matrix
        V = np.vander(x, d + 1, increasing=True)
        s = np.linalg.svd(V / np.linalg.norm(V, axis=0), compute_uv=False)
        expected.append(s[0] / s[-1])
    np.testing.assert_allclose(raw.get_ydata(), expected, rtol=1e-9)
    assert "columns scaled to unit length" in raw.get_label()
    stable = _line(ax, "condition")
    assert "stable basis the fits use" in stable.get_label()
    assert np.all(raw.get_ydata()[2:] > stable.get_ydata()[2:])  # raw powers are worse
    assert ax.get_yscale() == "log"
    # without the data, or for a ladder that is not polynomial, no comparison line
    assert not [
        ln
        for ln in plot(result, "conditioning").axes[0].get_lines()
        if ln.get_gid() == "raw-condition"
    ]
    assert "raw-condition" in {
        ln.get_gid()
        for ln in figures(result, X=X, views=["conditioning"])["conditioning"].axes[0].get_lines()
    }


def test_long_legend_entries_are_wrapped(result):
    ax = plot(_exploding(result), "errors").axes[0]
    assert all(len(line) <= 90 for t in _legend_texts(ax) for line in t.splitlines())
