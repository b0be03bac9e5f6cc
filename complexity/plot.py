"""Figures of a sweep: what the curves, the error split, the fits and the choice look like.

Every view is drawn by :func:`plot` (also :meth:`SweepResult.plot`) and returns a
:class:`matplotlib.figure.Figure`. Views:

``"errors"``
    Training and test error against capacity, the test error's ±1 standard-error band, and the
    recommended capacity marked with its rule.
``"parts"``
    The test error split into stacked noise, squared bias and variance.
``"fits"``
    For one predictor: the data, the curves fitted at the recommended capacity and its
    neighbours, a band from refits on bootstrap resamples, and the region outside the measured
    range shaded. Needs the data (``X=``, ``y=``); the models are refitted.
``"stability"``
    How often each capacity is chosen when the data are resampled.
``"conditioning"``
    Conditioning of the design the fits use (the stable basis: Legendre polynomials of x mapped
    to [-1, 1], or centred and scaled columns; not raw powers) and coefficient size against
    capacity, where the sweep recorded them
    (least-squares ladders on the exact engine).

matplotlib is an optional dependency: ``pip install "complexity[plot]"``. Figures are built
without pyplot, so nothing is left open in pyplot's figure list and no global style changes.
"""

from __future__ import annotations

import math
import numbers
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from ._validation import _short_repr, check_option

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

    from .ladders import Ladder
    from .result import SweepResult

__all__ = [
    "VIEWS",
    "capacity_words",
    "figure_png",
    "figures",
    "fits_available",
    "has_diagnostics",
    "plot",
]

#: The names accepted by :func:`plot` as ``view``.
VIEWS: tuple[str, ...] = ("errors", "parts", "fits", "stability", "conditioning")

#: Okabe–Ito colours (colour-blind safe), by role.
COLOURS: dict[str, str] = {
    "train": "#0072B2",  # blue
    "test": "#D55E00",  # vermillion
    "marker": "#000000",  # black
    "bias": "#E69F00",  # orange
    "variance": "#56B4E9",  # sky blue
    "noise": "#009E73",  # bluish green
    "excess": "#CC79A7",  # reddish purple
    "lower": "#0072B2",  # blue
    "higher": "#CC79A7",  # reddish purple
    "other": "#56B4E9",  # sky blue
    "outside": "#F0E442",  # yellow (pale fill)
}

_STYLE: dict[str, Any] = {
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.edgecolor": "#4d4d4d",
    "axes.linewidth": 0.8,
    "axes.grid": True,
    "axes.grid.axis": "y",
    "grid.color": "#dedede",
    "grid.linewidth": 0.6,
    "axes.titlelocation": "left",
    "axes.titlesize": 11,
    "axes.titleweight": "bold",
    "axes.labelsize": 10,
    "axes.labelcolor": "#222222",
    "font.size": 9,
    "xtick.color": "#4d4d4d",
    "ytick.color": "#4d4d4d",
    "legend.frameon": False,
    "legend.fontsize": 8.5,
    "lines.linewidth": 1.8,
    "lines.markersize": 4.5,
}

_INSTALL_HINT = 'pip install "complexity[plot]"'


# --------------------------------------------------------------------------------------------
# matplotlib access
# --------------------------------------------------------------------------------------------


def _matplotlib() -> Any:
    """Import matplotlib, or raise an ImportError that names the extra to install."""
    try:
        import matplotlib
        import matplotlib.figure
        import matplotlib.ticker
    except ImportError as exc:
        raise ImportError(
            f"complexity's figures and report need matplotlib, which is not installed; "
            f"install it with: {_INSTALL_HINT}"
        ) from exc
    return matplotlib


def _new_axes(ax: Axes | None, size: tuple[float, float] = (7.0, 4.2)) -> tuple[Figure, Axes]:
    mpl = _matplotlib()
    if ax is not None:
        if not isinstance(ax, mpl.axes.Axes):
            raise TypeError(f"ax must be a matplotlib Axes or None; got {_short_repr(ax)}.")
        return ax.figure, ax
    fig = mpl.figure.Figure(figsize=size, layout="constrained")
    return fig, fig.add_subplot()


# --------------------------------------------------------------------------------------------
# words and axes
# --------------------------------------------------------------------------------------------


def capacity_words(capacity_name: str) -> str:
    """Plain words for a capacity axis (``"degree"`` -> ``"polynomial degree"``).

    Examples
    --------
    >>> from complexity.plot import capacity_words
    >>> capacity_words("n_features")
    'number of predictors'
    """
    return {"degree": "polynomial degree", "n_features": "number of predictors"}.get(
        capacity_name, capacity_name
    )


def _squared(units: str | None) -> str:
    if not units:
        return ""
    simple = all(ch.isalnum() or ch in "°µΩ%" for ch in units)
    return f" ({units}²)" if simple else f" (({units})²)"


def _with_units(label: str, units: str | None) -> str:
    return f"{label} ({units})" if units else label


def _error_label(y_units: str | None) -> str:
    return "mean squared error" + _squared(y_units)


def _capacity_positions(capacities: Sequence[Any]) -> tuple[np.ndarray, list[str] | None]:
    """x coordinates for the capacities: their values when numeric and increasing, else 0..C-1.

    Returns the coordinates and, for the positional case, tick labels.
    """
    numeric = all(
        isinstance(c, numbers.Real) and not isinstance(c, bool) and math.isfinite(float(c))
        for c in capacities
    )
    if numeric:
        values = np.array([float(c) for c in capacities])
        if values.size == 1 or np.all(np.diff(values) > 0):
            return values, None
    return np.arange(len(capacities), dtype=np.float64), [str(c) for c in capacities]


def _capacity_axis(ax: Axes, result: SweepResult, x: np.ndarray, labels: list[str] | None) -> None:
    mpl = _matplotlib()
    ax.set_xlabel(capacity_words(result.capacity_name))
    if labels is not None:
        step = max(1, math.ceil(len(labels) / 14))
        ax.set_xticks(x[::step], labels[::step])
    elif all(float(v).is_integer() for v in x):
        ax.xaxis.set_major_locator(mpl.ticker.MaxNLocator(integer=True, nbins=12))
    span = float(x[-1] - x[0]) if len(x) > 1 else 1.0
    ax.set_xlim(x[0] - 0.04 * span - 0.5 * _bar_width(x), x[-1] + 0.04 * span + 0.5 * _bar_width(x))


def _bar_width(x: np.ndarray) -> float:
    if len(x) < 2:
        return 0.8
    return 0.8 * float(np.min(np.diff(x)))


def _legend(ax: Axes, below: bool, handles: list[Any] | None = None) -> None:
    """A legend under the plot for our own figures, else inside the user's axes where it fits."""
    if handles is None:
        handles, labels = ax.get_legend_handles_labels()
    else:
        labels = [h.get_label() for h in handles]
    if below:
        longest = max((len(t) for t in labels), default=0)
        columns = 3 if longest <= 30 else (2 if longest <= 50 else 1)
        ax.figure.legend(
            handles, labels, loc="outside lower center", ncols=min(columns, len(labels))
        )
    else:
        ax.legend(handles, labels, loc="best")


def _recommended_position(result: SweepResult) -> int:
    caps = list(result.curves.index)
    for i, c in enumerate(caps):
        if c is result.recommended or c == result.recommended:
            return i
    raise ValueError(
        f"result.recommended ({result.recommended!r}) is not one of the swept capacities {caps}."
    )


def _mark_recommended(ax: Axes, result: SweepResult, x_rec: float) -> None:
    words = capacity_words(result.capacity_name)
    ax.axvline(
        x_rec,
        color=COLOURS["marker"],
        linestyle=(0, (4, 3)),
        linewidth=1.1,
        zorder=1,
        label=f"recommended {words}: {result.recommended} (rule {result.rule})",
        gid="recommended",
    )


def _plan_words(result: SweepResult) -> str:
    kind = (
        result.metadata.get("plan", {}).get("kind") if isinstance(result.metadata, dict) else None
    )
    return {
        "bootstrap": "test error (out-of-bag)",
        "cross-validation": "test error (held-out folds)",
        "splitter": "test error (held-out rows)",
        "simulation": "test error (new data from the model)",
    }.get(kind, "test error")


def _column(result: SweepResult, name: str) -> np.ndarray:
    if name not in result.curves:
        raise ValueError(
            f"result.curves has no column {name!r}; columns: {list(result.curves.columns)}."
        )
    return result.curves[name].to_numpy(dtype=np.float64)


# --------------------------------------------------------------------------------------------
# views
# --------------------------------------------------------------------------------------------


def _draw_errors(
    result: SweepResult,
    ax: Axes,
    *,
    y_units: str | None = None,
    log: Any = "auto",
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
    ax.plot(x, test, marker="o", color=COLOURS["test"], label=_plan_words(result), gid="test")
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

    values = np.concatenate([train, test - se, test + se])
    values = values[np.isfinite(values)]
    use_log = (
        bool(log)
        if log != "auto"
        else (values.size > 0 and values.min() > 0 and values.max() / values.min() > 30)
    )
    if use_log:
        ax.set_yscale("log")
        ax.grid(True, which="major", axis="y")
    _capacity_axis(ax, result, x, labels)
    ax.set_ylabel(_error_label(y_units))
    ax.set_title(f"Training and test error by {capacity_words(result.capacity_name)}")
    _legend(ax, below)


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
    if not np.isfinite(noise).all() and "bias_sq_plus_noise" in result.curves:
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
        label=_plan_words(result),
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
    if np.any(np.isfinite(bias) & (bias < 0)):
        ax.text(
            1.0,
            1.01,
            "estimated squared bias below zero shown as zero",
            transform=ax.transAxes,
            ha="right",
            va="bottom",
            fontsize=7.5,
            color="#555555",
        )
    _capacity_axis(ax, result, x, labels)
    ax.set_ylabel(_error_label(y_units))
    ax.set_title("Where the test error comes from")
    _legend(ax, below)


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


def _diagnostic_columns(curves: pd.DataFrame) -> tuple[str | None, str | None]:
    """Find the conditioning and coefficient-size columns a sweep recorded, if any."""
    cond = next((c for c in curves.columns if "cond" in str(c).lower()), None)
    coef = next((c for c in curves.columns if "coef" in str(c).lower()), None)
    return cond, coef


def has_diagnostics(result: SweepResult) -> bool:
    """True when the result carries conditioning or coefficient-size columns.

    Examples
    --------
    >>> import complexity as cx
    >>> from complexity.plot import has_diagnostics
    >>> X, y = cx.datasets.pressure_sensor()
    >>> r = cx.sweep(cx.PolynomialLadder(range(0, 3)), X, y, plan=cx.Bootstrap(5), random_state=0)
    >>> isinstance(has_diagnostics(r), bool)
    True
    """
    cond, coef = _diagnostic_columns(result.curves)
    return cond is not None or coef is not None


def _diagnostic_line(
    ax: Any, x: Any, values: Any, marker: str, colour: str, label: str, gid: str, ylabel: str
) -> Any:
    """One diagnostic curve on ``ax`` (log scale when it spans more than 30x); returns the line."""
    (line,) = ax.plot(x, values, marker=marker, color=COLOURS[colour], label=label, gid=gid)
    if _spread(values) > 30:
        ax.set_yscale("log")
    ax.set_ylabel(ylabel)
    return line


def _spread(values: np.ndarray) -> float:
    """max/min of the finite values when all are positive, else 1 (no log axis)."""
    finite = values[np.isfinite(values)]
    if finite.size == 0 or finite.min() <= 0:
        return 1.0
    return float(finite.max() / finite.min())


def _draw_conditioning(result: SweepResult, ax: Axes, *, below: bool = False) -> None:
    cond, coef = _diagnostic_columns(result.curves)
    if cond is None and coef is None:
        raise ValueError(
            "this result has no conditioning or coefficient-size columns; they are recorded for "
            "least-squares ladders on the exact engine (sweep(..., engine='exact'))."
        )
    caps = list(result.curves.index)
    x, labels = _capacity_positions(caps)
    pos = _recommended_position(result)
    handles = []
    first = ax
    if cond is not None:
        handles.append(
            _diagnostic_line(
                ax,
                x,
                _column(result, cond),
                "s",
                "train",
                "condition number of the stable basis the fits use (not raw powers)",
                "condition",
                f"condition number ({cond})",
            )
        )
    if coef is not None:
        target = ax.twinx() if cond is not None else ax
        if target is not ax:
            target.spines["right"].set_visible(True)
            target.grid(False)
        handles.append(
            _diagnostic_line(
                target,
                x,
                _column(result, coef),
                "o",
                "bias",
                "coefficient size",
                "coefficient-size",
                f"coefficient size ({coef})",
            )
        )
    _mark_recommended(first, result, x[pos])
    handles.append(next(a for a in first.get_lines() if a.get_gid() == "recommended"))
    _capacity_axis(first, result, x, labels)
    first.set_title("Conditioning of the fitted design and coefficient size")
    _legend(first, below, handles=handles)


def _ladder_from_metadata(result: SweepResult) -> Ladder:
    from .ladders import FeatureLadder, PolynomialLadder

    desc = result.metadata.get("ladder", {}) if isinstance(result.metadata, dict) else {}
    kind = desc.get("kind")
    if kind == "polynomial":
        domain = desc.get("domain")
        return PolynomialLadder(desc["degrees"], domain=None if domain is None else tuple(domain))
    if kind == "features" and desc.get("estimator") is None:
        return FeatureLadder(desc["counts"], order=desc.get("order"))
    raise ValueError(
        "the 'fits' view refits the models and cannot rebuild this ladder from the result "
        f"({desc.get('kind', 'unknown')} ladder); pass the ladder used, e.g. plot(result, 'fits', "
        "X=X, y=y, ladder=ladder)."
    )


def _fit_predict(model: Any, X: np.ndarray, y: np.ndarray, grid: np.ndarray) -> np.ndarray:
    from sklearn.base import clone

    fitted = clone(model).fit(X, y)
    return np.asarray(fitted.predict(grid), dtype=np.float64).ravel()


def _draw_fits(
    result: SweepResult,
    ax: Axes,
    *,
    below: bool = False,
    X: Any,
    y: Any,
    ladder: Ladder | None = None,
    x_units: str | None = None,
    y_units: str | None = None,
    band_resamples: int = 100,
    beyond: float = 0.15,
) -> None:
    from ._validation import check_int, check_X_y
    from .ladders import Ladder

    if X is None or y is None:
        raise ValueError(
            "the 'fits' view needs the data the sweep used: pass X=... and y=... "
            "(e.g. result.plot('fits', X=X, y=y))."
        )
    data = check_X_y(X, y)
    if data.X.shape[1] != 1:
        raise ValueError(
            f"the 'fits' view draws one predictor against the response; X has {data.X.shape[1]} "
            "columns."
        )
    n_expected = result.metadata.get("n_samples") if isinstance(result.metadata, dict) else None
    if n_expected is not None and int(n_expected) != data.X.shape[0]:
        raise ValueError(
            f"X has {data.X.shape[0]} rows but the sweep used {n_expected}; pass the same data."
        )
    if ladder is None:
        ladder = _ladder_from_metadata(result)
    elif not isinstance(ladder, Ladder):
        raise TypeError(f"ladder must be a complexity ladder or None; got {_short_repr(ladder)}.")
    if list(ladder.capacities) != list(result.curves.index):
        raise ValueError(
            f"ladder capacities {list(ladder.capacities)} differ from the result's "
            f"{list(result.curves.index)}; pass the ladder the sweep used."
        )
    band_resamples = check_int("band_resamples", band_resamples, minimum=0)
    if not (isinstance(beyond, numbers.Real) and 0 <= float(beyond) <= 2):
        raise ValueError(
            f"beyond must be a number in [0, 2] (share of the x range); got {beyond!r}."
        )

    Xa, ya = data.X, data.y
    names = data.feature_names or tuple(result.metadata.get("feature_names") or ()) or None
    models = ladder.build(Xa, names)
    pos = _recommended_position(result)
    caps = list(ladder.capacities)
    lo, hi = float(Xa.min()), float(Xa.max())
    pad = float(beyond) * (hi - lo)
    grid_x = np.linspace(lo - pad, hi + pad, 301)
    grid = grid_x.reshape(-1, 1)
    if names is not None:
        grid = pd.DataFrame(grid, columns=list(names))
        Xfit: Any = pd.DataFrame(Xa, columns=list(names))
    else:
        Xfit = Xa

    words = capacity_words(result.capacity_name)
    if pad > 0:
        ax.axvspan(
            lo - pad,
            lo,
            color=COLOURS["outside"],
            alpha=0.25,
            linewidth=0,
            label="outside the measured range",
            gid="outside-range",
        )
        ax.axvspan(
            hi, hi + pad, color=COLOURS["outside"], alpha=0.25, linewidth=0, gid="outside-range"
        )

    if band_resamples:
        seed = result.metadata.get("seed_entropy", 0) if isinstance(result.metadata, dict) else 0
        seed = seed if isinstance(seed, int) else 0
        rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(0xF175,)))
        curves = []
        for _ in range(band_resamples):
            rows = rng.integers(0, Xa.shape[0], Xa.shape[0])
            if ladder.training_shortfall(pos, Xa[rows]) is not None:
                continue
            Xb = Xfit.iloc[rows] if isinstance(Xfit, pd.DataFrame) else Xa[rows]
            try:
                curves.append(_fit_predict(models[pos], Xb, ya[rows], grid))
            except (ValueError, np.linalg.LinAlgError):
                continue
        if len(curves) >= 2:
            low, high = np.percentile(np.vstack(curves), [5, 95], axis=0)
            ax.fill_between(
                grid_x,
                low,
                high,
                color=COLOURS["test"],
                alpha=0.2,
                linewidth=0,
                label=f"middle 90% of {len(curves)} bootstrap refits",
                gid="band",
            )

    ax.plot(
        Xa[:, 0], ya, "o", color="#333333", markersize=3.5, alpha=0.75, label="data", gid="data"
    )
    shown = [(p, caps[p]) for p in (pos - 1, pos, pos + 1) if 0 <= p < len(caps)]
    for p, cap in shown:
        line = _fit_predict(models[p], Xfit, ya, grid)
        if p == pos:
            style = {
                "color": COLOURS["test"],
                "linewidth": 2.2,
                "zorder": 5,
                "gid": "fit-recommended",
                "label": f"{words} {cap} (recommended)",
            }
        else:
            style = {
                "color": COLOURS["lower"] if p < pos else COLOURS["higher"],
                "linewidth": 1.4,
                "linestyle": (0, (5, 2)) if p < pos else (0, (1.5, 1.5)),
                "gid": f"fit-{p - pos:+d}",
                "label": f"{words} {cap}",
            }
        ax.plot(grid_x, line, **style)

    span = float(ya.max() - ya.min()) or 1.0
    ax.set_ylim(float(ya.min()) - 0.35 * span, float(ya.max()) + 0.35 * span)
    ax.set_xlim(grid_x[0], grid_x[-1])
    x_name = names[0] if names else "predictor"
    y_name = y.name if isinstance(y, pd.Series) and y.name is not None else "response"
    ax.set_xlabel(_with_units(str(x_name), x_units))
    ax.set_ylabel(_with_units(str(y_name), y_units))
    ax.set_title(f"Fitted curves near the recommended {words}")
    _legend(ax, below)


# --------------------------------------------------------------------------------------------
# public
# --------------------------------------------------------------------------------------------


def plot(
    result: SweepResult,
    view: str = "errors",
    *,
    ax: Axes | None = None,
    X: Any = None,
    y: Any = None,
    ladder: Ladder | None = None,
    x_units: str | None = None,
    y_units: str | None = None,
    band_resamples: int = 100,
    beyond: float = 0.15,
    log: Any = "auto",
    clip: bool = True,
) -> Figure:
    """Draw one view of a sweep result.

    Parameters
    ----------
    result : SweepResult
        What :func:`complexity.sweep` returned (or :func:`complexity.load_result` read).
    view : {"errors", "parts", "fits", "stability", "conditioning"}, default="errors"
        ``"errors"``: training and test error with a ±1 SE band and the recommended capacity;
        ``"parts"``: stacked noise, squared bias and variance; ``"fits"``: the data with fitted
        curves (one predictor; needs ``X`` and ``y``); ``"stability"``: how often each capacity
        is chosen; ``"conditioning"``: design condition number and coefficient size (where the
        sweep recorded them).
    ax : matplotlib Axes, optional
        Draw into these axes instead of a new figure.
    X, y : array-like, optional
        The data of the sweep, for the ``"fits"`` view.
    ladder : Ladder, optional
        The ladder of the sweep, for the ``"fits"`` view; polynomial and plain feature ladders
        are rebuilt from the result when omitted.
    x_units, y_units : str, optional
        Units of the predictor and the response (e.g. ``"°C"``, ``"kPa"``), shown on the axes;
        errors are labelled in the squared response unit.
    band_resamples : int, default=100
        ``"fits"``: bootstrap refits at the recommended capacity for the band (0: no band).
        Seeded from the result's seed, so the figure is reproducible.
    beyond : float, default=0.15
        ``"fits"``: how far past the measured range to draw, as a share of the range; that
        region is shaded.
    log : "auto" or bool, default="auto"
        ``"errors"``: logarithmic error axis ("auto": when errors span more than a factor of 30).
    clip : bool, default=True
        ``"parts"``: cut the error axis at three times the smallest total so that large errors
        at low capacity do not flatten the rest; cut bars are labelled with their value.

    Returns
    -------
    matplotlib.figure.Figure
        The new figure, or the figure of ``ax``.

    Raises
    ------
    ImportError
        When matplotlib is not installed (``pip install "complexity[plot]"``).

    Examples
    --------
    >>> import complexity as cx
    >>> X, y = cx.datasets.pressure_sensor()
    >>> result = cx.sweep(cx.PolynomialLadder(range(0, 6)), X, y, plan=cx.Bootstrap(10),
    ...                   random_state=0)
    >>> from complexity.plot import plot
    >>> fig = plot(result, "errors", y_units="kPa")
    >>> fig.axes[0].get_xlabel()
    'polynomial degree'
    >>> fig = result.plot("fits", X=X, y=y, band_resamples=20)
    """
    from .result import SweepResult

    if not isinstance(result, SweepResult):
        raise TypeError(f"result must be a SweepResult; got {_short_repr(result)}.")
    check_option("view", view, VIEWS)
    mpl = _matplotlib()
    size = (7.0, 5.4) if view == "fits" else (7.0, 4.8)
    below = ax is None  # our own figure: the legend goes under the plot, never over the data
    with mpl.rc_context(_STYLE):
        fig, axes = _new_axes(ax, size)
        if view == "errors":
            _draw_errors(result, axes, y_units=y_units, log=log, below=below)
        elif view == "parts":
            _draw_parts(result, axes, y_units=y_units, clip=clip, below=below)
        elif view == "stability":
            _draw_stability(result, axes, below=below)
        elif view == "conditioning":
            _draw_conditioning(result, axes, below=below)
        else:
            _draw_fits(
                result,
                axes,
                below=below,
                X=X,
                y=y,
                ladder=ladder,
                x_units=x_units,
                y_units=y_units,
                band_resamples=band_resamples,
                beyond=beyond,
            )
    return fig


def figures(
    result: SweepResult,
    *,
    X: Any = None,
    y: Any = None,
    ladder: Ladder | None = None,
    x_units: str | None = None,
    y_units: str | None = None,
    band_resamples: int = 100,
    views: Sequence[str] | None = None,
) -> dict[str, Figure]:
    """Every view that applies to ``result``, as ``{view: Figure}`` in the order of :data:`VIEWS`.

    ``"fits"`` is included when ``X`` and ``y`` are given with one predictor and the ladder is
    known; ``"conditioning"`` when the result carries those diagnostics. ``views`` limits the
    choice to the views named (those that do not apply are still left out).

    Examples
    --------
    >>> import complexity as cx
    >>> X, y = cx.datasets.pressure_sensor()
    >>> r = cx.sweep(cx.PolynomialLadder(range(0, 4)), X, y, plan=cx.Bootstrap(10), random_state=0)
    >>> from complexity.plot import figures
    >>> list(figures(r))[:2]
    ['errors', 'parts']
    """
    wanted = VIEWS
    if views is not None:
        if isinstance(views, str):
            views = [views]
        for v in views:
            check_option("views", v, VIEWS)
        wanted = tuple(v for v in VIEWS if v in views)
    out: dict[str, Figure] = {}
    for view in wanted:
        if view == "conditioning" and not has_diagnostics(result):
            continue
        if view == "fits" and not fits_available(result, X, ladder):
            continue
        out[view] = plot(
            result,
            view,
            X=X,
            y=y,
            ladder=ladder,
            x_units=x_units,
            y_units=y_units,
            band_resamples=band_resamples,
        )
    return out


def fits_available(result: SweepResult, X: Any, ladder: Ladder | None = None) -> bool:
    """True when the ``"fits"`` view can be drawn for ``result`` with predictors ``X``.

    Examples
    --------
    >>> import complexity as cx
    >>> X, y = cx.datasets.pressure_sensor()
    >>> r = cx.sweep(cx.PolynomialLadder(range(0, 3)), X, y, plan=cx.Bootstrap(5), random_state=0)
    >>> from complexity.plot import fits_available
    >>> fits_available(r, X), fits_available(r, None)
    (True, False)
    """
    if X is None:
        return False
    shape = np.shape(X)
    if len(shape) == 2 and shape[1] != 1:
        return False
    if ladder is not None:
        return True
    try:
        _ladder_from_metadata(result)
    except (ValueError, KeyError, TypeError):
        return False
    return True


def figure_png(fig: Figure, *, dpi: int = 110) -> bytes:
    """The figure as PNG bytes (no software stamp in the file's metadata).

    Examples
    --------
    >>> import complexity as cx
    >>> X, y = cx.datasets.pressure_sensor()
    >>> r = cx.sweep(cx.PolynomialLadder(range(0, 3)), X, y, plan=cx.Bootstrap(5), random_state=0)
    >>> from complexity.plot import figure_png, plot
    >>> figure_png(plot(r))[:8] == b"\\x89PNG\\r\\n\\x1a\\n"
    True
    """
    import io

    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=dpi, metadata={"Software": None})
    return buffer.getvalue()
