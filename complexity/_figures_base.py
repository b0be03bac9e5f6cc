"""The common ground of every figure: matplotlib access, style, colours, axes and markers.

Private; the views live in ``_figures_curves`` (errors, parts, stability), ``_figures_conditioning``
and ``_figures_fits``, and :mod:`complexity.plot` is the front door. Nothing here imports
:mod:`complexity.result`: a result is an earlier stage, checked by its shape (:func:`check_result`).
"""

from __future__ import annotations

import math
import numbers
import textwrap
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from ._text import capacity_words
from ._validation import _short_repr

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

    from .result import SweepResult

#: legend entries are wrapped at this many characters (a 7-inch figure holds about 100)
_LEGEND_WIDTH = 90

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
    """A legend under the plot for our own figures, else inside the user's axes where it fits.

    Long entries are wrapped so that the legend never runs past the figure's edge.
    """
    if handles is None:
        handles, labels = ax.get_legend_handles_labels()
    else:
        labels = [h.get_label() for h in handles]
    labels = [textwrap.fill(t, _LEGEND_WIDTH) for t in labels]
    if below:
        longest = max((len(line) for t in labels for line in t.splitlines()), default=0)
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


def _column(result: SweepResult, name: str) -> np.ndarray:
    if name not in result.curves:
        raise ValueError(
            f"result.curves has no column {name!r}; columns: {list(result.curves.columns)}."
        )
    return result.curves[name].to_numpy(dtype=np.float64)


def _spread(values: np.ndarray) -> float:
    """max/min of the finite values when all are positive, else 1 (no log axis)."""
    finite = values[np.isfinite(values)]
    if finite.size == 0 or finite.min() <= 0:
        return 1.0
    return float(finite.max() / finite.min())


#: what the figures and the report read of a result
_RESULT_ATTRIBUTES = ("curves", "recommended", "rule", "rules", "stability", "noise", "metadata")


def check_result(result: Any) -> None:
    """Refuse anything that does not have the shape of a :class:`~complexity.SweepResult`.

    The check is by shape (a ``curves`` DataFrame and the other attributes the figures read),
    not by class, so this stage never imports the earlier one.

    Examples
    --------
    >>> check_result("result")
    Traceback (most recent call last):
    ...
    TypeError: result must be a SweepResult (what complexity.sweep returns); got 'result'.
    """
    if not (
        all(hasattr(result, name) for name in _RESULT_ATTRIBUTES)
        and isinstance(getattr(result, "curves", None), pd.DataFrame)
    ):
        raise TypeError(
            "result must be a SweepResult (what complexity.sweep returns); "
            f"got {_short_repr(result)}."
        )
