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
    capacity, where the sweep recorded them (least-squares ladders on the exact engine). For a
    polynomial ladder given ``X``, also the condition number the raw power design
    (1, x, x², ... on your x, columns scaled to unit length) would have had.

This module is the front door; the views are drawn by the private modules ``_figures_curves``
(errors, parts, stability), ``_figures_conditioning`` and ``_figures_fits`` on the common
ground of ``_figures_base``. None of them imports :mod:`complexity.result` at run time: a result
is an earlier stage.

matplotlib is an optional dependency: ``pip install "complexity[plot]"``. Figures are built
without pyplot, so nothing is left open in pyplot's figure list and no global style changes.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

from ._figures_base import _STYLE, COLOURS, _matplotlib, _new_axes, check_result
from ._figures_conditioning import _draw_conditioning, _has_diagnostics
from ._figures_curves import _draw_errors, _draw_parts, _draw_stability
from ._figures_fits import _draw_fits, _fits_available
from ._text import capacity_words
from ._validation import check_option

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

    from .ladders import Ladder
    from .result import SweepResult

__all__ = [
    "COLOURS",
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


def has_diagnostics(result: SweepResult) -> bool:
    """True when the result carries conditioning or coefficient-size columns.

    Examples
    --------
    >>> import complexity as cx
    >>> from complexity.plot import has_diagnostics
    >>> X, y = cx.datasets.pressure_sensor()
    >>> r = cx.sweep(cx.PolynomialLadder(range(0, 3)), X, y, plan=cx.Bootstrap(5), random_state=0)
    >>> has_diagnostics(r), r.metadata["engine"]
    (True, 'exact')
    """
    return _has_diagnostics(result)


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
        is chosen; ``"conditioning"``: condition number of the design the fits use and
        coefficient size (where the sweep recorded them), and with ``X`` for a polynomial
        ladder the raw power design's condition number for comparison.
    ax : matplotlib Axes, optional
        Draw into these axes instead of a new figure.
    X, y : array-like, optional
        The data of the sweep, for the ``"fits"`` view (``X`` also for the raw power comparison
        of ``"conditioning"``).
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
        Keep the region where the choice is made readable. ``"errors"``: a log axis reaches at
        most three decades above and below the lowest test error (a linear one 30 times it);
        values beyond are drawn as triangles at the edge and named in the legend.
        ``"parts"``: cut the error axis at three times the smallest total; cut bars are labelled
        with their value.

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
    check_result(result)
    check_option("view", view, VIEWS)
    mpl = _matplotlib()
    size = (7.0, 5.4) if view == "fits" else (7.0, 4.8)
    below = ax is None  # our own figure: the legend goes under the plot, never over the data
    with mpl.rc_context(_STYLE):
        fig, axes = _new_axes(ax, size)
        if view == "errors":
            _draw_errors(result, axes, y_units=y_units, log=log, clip=clip, below=below)
        elif view == "parts":
            _draw_parts(result, axes, y_units=y_units, clip=clip, below=below)
        elif view == "stability":
            _draw_stability(result, axes, below=below)
        elif view == "conditioning":
            _draw_conditioning(result, axes, X=X, below=below)
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
    return _fits_available(result, X, ladder)


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
