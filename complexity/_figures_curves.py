"""The views of the curves themselves: errors, the parts of the test error, stability.

Private (the front door is :mod:`complexity.plot`). Also the facts the report's captions state
about these figures: which values lie off the error axis (:func:`_errors_off_scale`) and where
the squared bias was estimated below zero (:func:`_negative_bias`).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from ._figures_base import (
    COLOURS,
    _bar_width,
    _capacity_axis,
    _capacity_positions,
    _column,
    _error_label,
    _legend,
    _mark_recommended,
    _recommended_position,
)
from ._text import capacity_words, plan_words

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.axes import Axes

    from .result import SweepResult

#: a log error axis reaches at most this many decades above and below the lowest test error
DECADES = 3
#: a linear error axis (with clipping) reaches at most this multiple of the lowest test error
LINEAR_REACH = 30.0


# --------------------------------------------------------------------------------------------
# errors
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class _OffScale:
    """Points of one curve outside the error axis: ``direction`` is "above" or "below"."""

    curve: str
    direction: str
    positions: tuple[int, ...]
    values: tuple[float, ...]


def _uses_log(values: np.ndarray, log: Any) -> bool:
    if log != "auto":
        return bool(log)
    # zeros (an exact fit) and negative band edges cannot sit on a log axis; they are marked
    positive = values[np.isfinite(values) & (values > 0)]
    return bool(positive.size > 0 and positive.max() / positive.min() > 30)


def _error_axis(
    result: SweepResult, log: Any = "auto", clip: bool = True
) -> tuple[bool, tuple[float, float] | None, list[_OffScale]]:
    """Scale, clipped limits (or None) and the off-scale points of the errors view.

    On a log axis the view keeps to ``DECADES`` decades either side of the lowest test error, so
    errors that explode at high capacity (or a training error that falls to rounding level) do
    not squash the region where the choice is made. On a linear axis it keeps below
    ``LINEAR_REACH`` times the lowest test error. ``clip=False`` keeps every value in view.
    """
    train = _column(result, "train_mse")
    test = _column(result, "test_mse")
    se = _column(result, "test_mse_se")
    use_log = _uses_log(np.concatenate([train, test - se, test + se]), log)
    positive = test[np.isfinite(test) & (test > 0)]
    if not clip or positive.size == 0:
        return use_log, None, []
    low = float(positive.min())
    if use_log:
        bottom, top = low / 10.0**DECADES, low * 10.0**DECADES
    else:
        bottom, top = -np.inf, low * LINEAR_REACH
    off: list[_OffScale] = []
    for name, values in (("test error", test), ("training error", train)):
        finite = np.isfinite(values)
        for direction, mask in (
            ("above", finite & (values > top)),
            ("below", finite & ((values < bottom) | (use_log & (values <= 0)))),
        ):
            if mask.any():
                where = np.flatnonzero(mask)
                off.append(
                    _OffScale(
                        name,
                        direction,
                        tuple(int(i) for i in where),
                        tuple(float(v) for v in values[where]),
                    )
                )
    if not off:
        return use_log, None, []
    shown = np.concatenate([train, test - se, test + se])
    inside = shown[np.isfinite(shown) & (shown >= bottom) & (shown <= top)]
    if use_log:
        inside = inside[inside > 0]
    above = any(o.direction == "above" for o in off)
    below = any(o.direction == "below" for o in off)
    if use_log:  # the lowest test error itself is always inside
        lo = bottom if below else float(inside.min()) / 1.5
        hi = top if above else float(inside.max()) * 1.5
    else:
        span = float(inside.max() - inside.min()) or float(inside.max()) or 1.0
        lo = float(inside.min()) - 0.05 * span
        hi = top if above else float(inside.max()) + 0.05 * span
    return use_log, (lo, hi), off


def _off_scale_words(result: SweepResult, item: _OffScale) -> str:
    caps = list(result.curves.index)
    where = ", ".join(str(caps[i]) for i in item.positions)
    words = capacity_words(result.capacity_name)
    if item.direction == "above":
        extreme = f"up to {max(item.values):.3g}"
    else:
        extreme = f"down to {min(item.values):.3g}"
    return f"{item.curve} {item.direction} the axis at {words} {where} ({extreme})"


def _errors_off_scale(result: SweepResult, log: Any = "auto", clip: bool = True) -> list[str]:
    """Sentences naming the values the errors view draws at the edge of its axis (may be empty).

    Examples
    --------
    >>> import warnings
    >>> import complexity as cx
    >>> X, y = cx.datasets.pressure_sensor()
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     r = cx.sweep(cx.PolynomialLadder(range(0, 4)), X, y, plan=cx.Bootstrap(10),
    ...                  random_state=0)
    >>> _errors_off_scale(r)
    []
    """
    return [_off_scale_words(result, o) for o in _error_axis(result, log, clip)[2]]


def _mark_off_scale(
    ax: Axes, result: SweepResult, x: np.ndarray, limits: tuple[float, float], off: list[_OffScale]
) -> list[Any]:
    """Triangles at the axis edge for the off-scale points; returns the legend handles."""
    handles = []
    for direction in ("above", "below"):
        items = [o for o in off if o.direction == direction]
        if not items:
            continue
        edge = limits[1] if direction == "above" else limits[0]
        marker = "^" if direction == "above" else "v"
        for item in items:
            colour = COLOURS["test"] if item.curve == "test error" else COLOURS["train"]
            ax.plot(
                x[list(item.positions)],
                [edge] * len(item.positions),
                marker=marker,
                markersize=8,
                linestyle="none",
                color=colour,
                clip_on=False,
                zorder=5,
                gid=f"off-scale-{direction}",
            )
        (proxy,) = ax.plot(
            [],
            [],
            marker=marker,
            linestyle="none",
            color="#555555",
            label="off the scale, drawn at the edge: "
            + "; ".join(_off_scale_words(result, o) for o in items),
        )
        handles.append(proxy)
    return handles


def _draw_errors(
    result: SweepResult,
    ax: Axes,
    *,
    y_units: str | None = None,
    log: Any = "auto",
    clip: bool = True,
    below: bool = False,
) -> None:
    caps = list(result.curves.index)
    x, labels = _capacity_positions(caps)
    train = _column(result, "train_mse")
    test = _column(result, "test_mse")
    se = _column(result, "test_mse_se")
    pos = _recommended_position(result)

    ax.fill_between(
        x,
        test - se,
        test + se,
        color=COLOURS["test"],
        alpha=0.18,
        linewidth=0,
        label="±1 standard error",
        gid="test-band",
    )
    ax.plot(
        x,
        train,
        marker="o",
        color=COLOURS["train"],
        label="training error (fit on all data)",
        gid="train",
    )
    ax.plot(
        x, test, marker="o", color=COLOURS["test"], label=plan_words(result.metadata), gid="test"
    )
    if result.rule == "one-se" and np.isfinite(test).any():
        best = int(np.nanargmin(test))
        limit = test[best] + se[best]
        ax.axhline(
            limit,
            color="#7f7f7f",
            linestyle=":",
            linewidth=1.0,
            gid="one-se-limit",
            label="one-standard-error limit",
        )
    _mark_recommended(ax, result, x[pos])
    ax.plot(
        [x[pos]],
        [test[pos]],
        marker="D",
        markersize=8,
        color=COLOURS["marker"],
        linestyle="none",
        zorder=4,
        gid="recommended-point",
    )

    use_log, limits, off = _error_axis(result, log, clip)
    if use_log:
        ax.set_yscale("log")
        ax.grid(True, which="major", axis="y")
    extra = []
    if limits is not None:
        ax.set_ylim(*limits)
        extra = _mark_off_scale(ax, result, x, limits, off)
    _capacity_axis(ax, result, x, labels)
    ax.set_ylabel(_error_label(y_units))
    ax.set_title(f"Training and test error by {capacity_words(result.capacity_name)}")
    handles, _ = ax.get_legend_handles_labels()
    _legend(ax, below, handles=[h for h in handles if h not in extra] + extra)


# --------------------------------------------------------------------------------------------
# parts
# --------------------------------------------------------------------------------------------


def _negative_bias(result: SweepResult) -> list[Any]:
    """The capacities whose squared bias was estimated below zero (drawn as 0 in "parts").

    Examples
    --------
    >>> import warnings
    >>> import complexity as cx
    >>> X, y = cx.datasets.pressure_sensor()
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     r = cx.sweep(cx.PolynomialLadder(range(0, 3)), X, y, plan=cx.Bootstrap(10),
    ...                  random_state=0)
    >>> _negative_bias(r)
    []
    """
    if "bias_sq" not in result.curves:
        return []
    bias = result.curves["bias_sq"].to_numpy(dtype=np.float64)
    return [c for c, b in zip(result.curves.index, bias) if np.isfinite(b) and b < 0]


def _negative_bias_words(result: SweepResult, capacities: list[Any]) -> str:
    words = capacity_words(result.capacity_name)
    where = ", ".join(str(c) for c in capacities)
    return (
        f"squared bias estimated below zero at {words} {where}, shown as 0: there the noise "
        "and variance estimates together exceed the test error"
    )


def _draw_parts(
    result: SweepResult,
    ax: Axes,
    *,
    y_units: str | None = None,
    clip: bool = True,
    below: bool = False,
) -> None:
    caps = list(result.curves.index)
    x, labels = _capacity_positions(caps)
    pos = _recommended_position(result)
    variance = np.nan_to_num(_column(result, "variance"), nan=0.0)
    noise = _column(result, "noise")
    bias = _column(result, "bias_sq")
    split = np.isfinite(noise).all() or "bias_sq_plus_noise" not in result.curves
    if not split:
        # without a noise estimate only the sum can be shown
        parts = [("squared bias + noise", _column(result, "bias_sq_plus_noise"), COLOURS["bias"])]
    else:
        parts = [
            ("noise", noise, COLOURS["noise"]),
            ("squared bias", np.clip(bias, 0.0, None), COLOURS["bias"]),
        ]
    parts.append(("variance", variance, COLOURS["variance"]))
    if "oob_excess" in result.curves and np.nansum(_column(result, "oob_excess")) > 0:
        # the out-of-bag models' extra variance: the stack then reaches the test-error marker
        parts.append(("out-of-bag excess", _column(result, "oob_excess"), COLOURS["excess"]))
    width = _bar_width(x)
    bottom = np.zeros(len(x))
    for label, values, colour in parts:
        values = np.nan_to_num(values, nan=0.0)
        ax.bar(
            x,
            values,
            width=width,
            bottom=bottom,
            color=colour,
            label=label,
            edgecolor="white",
            linewidth=0.5,
            gid=f"part-{label}",
        )
        bottom = bottom + values
    test = _column(result, "test_mse")
    ax.plot(
        x,
        test,
        marker="o",
        linestyle="none",
        color=COLOURS["marker"],
        markersize=4,
        label=plan_words(result.metadata),
        gid="test",
    )
    _mark_recommended(ax, result, x[pos])

    totals = np.maximum(bottom, np.nan_to_num(test, nan=0.0))
    positive = totals[totals > 0]
    if clip and positive.size and positive.max() > 4.0 * positive.min():
        top = 3.0 * float(positive.min())
        ax.set_ylim(0, top)
        for xi, total in zip(x, totals):
            if total > top:
                ax.annotate(
                    f"{total:.3g} ↑",
                    (xi, top),
                    xytext=(0, -3),
                    textcoords="offset points",
                    ha="center",
                    va="top",
                    fontsize=7.5,
                    rotation=90,
                    color="#222222",
                )
    negative = np.isfinite(bias) & (bias < 0)
    if split and negative.any():
        # where the bias bar would start (on top of the noise): a hollow marker, with the reason
        ax.plot(
            x[negative],
            np.nan_to_num(noise, nan=0.0)[negative],
            marker="X",
            markersize=7,
            linestyle="none",
            markerfacecolor="white",
            markeredgecolor=COLOURS["bias"],
            markeredgewidth=1.4,
            zorder=6,
            gid="bias-below-zero",
            label=_negative_bias_words(result, [caps[i] for i in np.flatnonzero(negative)]),
        )
    _capacity_axis(ax, result, x, labels)
    ax.set_ylabel(_error_label(y_units))
    ax.set_title("Where the test error comes from")
    _legend(ax, below)


# --------------------------------------------------------------------------------------------
# stability
# --------------------------------------------------------------------------------------------


def _draw_stability(result: SweepResult, ax: Axes, *, below: bool = False) -> None:
    caps = list(result.curves.index)
    x, labels = _capacity_positions(caps)
    pos = _recommended_position(result)
    share = result.stability.reindex(result.curves.index).to_numpy(dtype=np.float64) * 100.0
    colours = [COLOURS["test"] if i == pos else COLOURS["other"] for i in range(len(caps))]
    bars = ax.bar(
        x, np.nan_to_num(share, nan=0.0), width=_bar_width(x), color=colours, gid="shares"
    )
    bars.patches[pos].set_gid("recommended")
    bars.patches[pos].set_label(
        f"recommended {capacity_words(result.capacity_name)}: {result.recommended}"
    )
    if not np.isfinite(share).any():
        ax.text(
            0.5,
            0.5,
            "selection stability needs several replicates",
            transform=ax.transAxes,
            ha="center",
            va="center",
            color="#555555",
        )
    rule = (
        result.metadata.get("stability_rule", result.rule)
        if isinstance(result.metadata, dict)
        else result.rule
    )
    ax.set_ylim(0, 100)
    _capacity_axis(ax, result, x, labels)
    ax.set_ylabel("replicates choosing it (%)")
    ax.set_title(f"How often each {capacity_words(result.capacity_name)} is chosen (rule {rule})")
    _legend(ax, below)
