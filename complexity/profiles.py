"""Where in the range a fit is weak: squared bias, variance and test error along x.

The sweep's curves average over the whole range; a calibration engineer also needs to see that,
say, degree 4 is fine mid-range and weak at the ends. :func:`profile` refits the chosen degree
and its neighbours on bootstrap resamples of the data; every row is scored by the resamples that
left it out (out of bag), which gives per-row ``test_mse``, ``variance`` and ``bias_sq + noise``
(METHODS.md §2). Rows are then grouped into bins of equal count along x (one predictor), or
along the fitted value or a chosen column (several predictors), and averaged per bin.

Squared bias is ``bias_sq_plus_noise - noise`` with the sweep's noise estimate, as in the
curves; in a bin where the bias is small this difference can come out below zero, which says
"no bias detectable here", not a negative square. The variance is that of a fit on a bootstrap
training set (about 0.632 n distinct rows), a little larger than that of the full-data fit.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike

from ._refit import _bootstrap_weights, _fit_at, _held_out, _nested_fits, _setup
from ._validation import _short_repr, check_int
from .bands import CAUTION

if TYPE_CHECKING:
    from .result import SweepResult

__all__ = ["plot_profile", "profile"]


def _neighbours(degrees: tuple[int, ...], pos: int, width: int) -> list[int]:
    return list(range(max(pos - width, 0), min(pos + width, len(degrees) - 1) + 1))


def profile(
    result: SweepResult,
    X: ArrayLike,
    y: ArrayLike,
    *,
    capacity: int | None = None,
    neighbours: int = 1,
    n_bins: int = 8,
    along: str | int | None = None,
    n_boot: int = 200,
    random_state: Any = None,
) -> pd.DataFrame:
    """Binned squared bias, variance and test error along the range, per degree.

    Parameters
    ----------
    result : SweepResult
        A sweep of a :class:`~complexity.PolynomialLadder`.
    X, y : array-like
        The data it was swept on.
    capacity : int, optional
        The central degree; default the sweep's recommendation.
    neighbours : int, default=1
        How many swept degrees on each side of ``capacity`` to show too.
    n_bins : int, default=8
        Bins of (nearly) equal count; rows with equal position stay in one bin.
    along : str, int or None
        What to bin along: for one predictor, x (the default); for several, ``"fitted"`` (the
        full-data fit at ``capacity``, the default) or a column (name or position).
    n_boot : int, default=200
        Bootstrap resamples.
    random_state : None, int, SeedSequence or Generator

    Returns
    -------
    pandas.DataFrame
        One row per (degree, bin): ``degree``, ``bin``, ``low``, ``high`` (the bin's span along
        ``along``), ``centre`` (mean position), ``count`` (rows scored), ``test_mse``,
        ``bias_sq``, ``variance``, ``bias_sq_plus_noise``. ``attrs``: ``along``, ``noise``,
        ``n_boot`` and the caution.

    Examples
    --------
    >>> import warnings
    >>> import complexity as cx
    >>> from complexity import profiles
    >>> X, y = cx.datasets.pressure_sensor()
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     r = cx.sweep(cx.PolynomialLadder(range(0, 7)), X, y, plan=cx.Bootstrap(30),
    ...                  random_state=0)
    >>> table = profiles.profile(r, X, y, capacity=4, n_bins=4, n_boot=100, random_state=0)
    >>> sorted(set(table["degree"]))
    [3, 4, 5]
    >>> int(table.loc[table["degree"] == 4, "count"].sum())
    51
    """
    setup = _setup(result, X, y)
    pos = setup.position(capacity)
    neighbours = check_int("neighbours", neighbours, minimum=0)
    n = setup.X.shape[0]
    n_bins = check_int("n_bins", n_bins, minimum=1)
    if n_bins > n:
        raise ValueError(f"n_bins must be at most the number of rows ({n}); got {n_bins}.")
    n_boot = check_int("n_boot", n_boot, minimum=10)
    position, label = _position(setup, pos, along)

    keep = _neighbours(setup.degrees, pos, neighbours)
    weights = _bootstrap_weights(n, n_boot, random_state)
    Z = setup.design(setup.X)
    batch = _nested_fits(Z, setup.y, weights, Z[:1], setup.n_cols)
    held = _held_out(batch, weights, setup.y)
    bins = _equal_count_bins(position, n_bins)
    rows = []
    for c in keep:
        for b in range(int(bins.max()) + 1):
            rows_b = (bins == b) & np.isfinite(held.error[:, c])
            span = position[bins == b]
            sq = (held.mean[rows_b, c] - setup.y[rows_b]) ** 2
            count = int(rows_b.sum())
            rows.append(
                {
                    "degree": setup.degrees[c],
                    "bin": b,
                    "low": float(span.min()),
                    "high": float(span.max()),
                    "centre": float(span.mean()),
                    "count": count,
                    "test_mse": float(held.error[rows_b, c].mean()) if count else np.nan,
                    "bias_sq": float(sq.mean() - setup.noise) if count else np.nan,
                    "variance": float(held.var[rows_b, c].mean()) if count else np.nan,
                    "bias_sq_plus_noise": float(sq.mean()) if count else np.nan,
                }
            )
    frame = pd.DataFrame(rows)
    frame.attrs.update(along=label, noise=setup.noise, n_boot=n_boot, caution=CAUTION)
    return frame


def _position(setup: Any, pos: int, along: str | int | None) -> tuple[np.ndarray, str]:
    """The value each row is binned by, and its label."""
    p = setup.X.shape[1]
    if along is None:
        along = setup.names[0] if p == 1 else "fitted"
    if along == "fitted":
        fit = _fit_at(setup, pos)
        return fit.mean(setup.design(setup.X)), "fitted value"
    if isinstance(along, str) and along in setup.names:
        j = setup.names.index(along)
    elif isinstance(along, (int, np.integer)) and not isinstance(along, bool) and 0 <= along < p:
        j = int(along)
    else:
        raise ValueError(
            f"along must be 'fitted', a column name {list(setup.names)} or a position "
            f"0..{p - 1}; got {_short_repr(along)}."
        )
    return setup.X[:, j].copy(), setup.names[j]


def _equal_count_bins(position: np.ndarray, n_bins: int) -> np.ndarray:
    """Bin labels 0..k-1 of nearly equal count; tied positions share a bin (k <= n_bins)."""
    order = np.argsort(position, kind="stable")
    ranks = np.empty(position.size, dtype=np.float64)
    ranks[order] = np.arange(position.size)
    # tied values take the rank of their first member, so they never straddle a boundary
    values, first = np.unique(position[order], return_index=True)
    start = first[np.searchsorted(values, position)]
    labels = np.floor(start * n_bins / position.size).astype(np.intp)
    _, dense = np.unique(labels, return_inverse=True)
    return dense.reshape(-1)


def plot_profile(table: pd.DataFrame, *, y_units: str | None = None, ax: Any = None) -> Any:
    """Draw a :func:`profile` table: one panel per quantity, one line per degree.

    Needs matplotlib (``pip install "complexity[plot]"``).

    Parameters
    ----------
    table : pandas.DataFrame
        The output of :func:`profile`.
    y_units : str, optional
        Units of y, for the axis labels (squared units).
    ax : sequence of three matplotlib Axes, optional
        Where to draw; default a new figure.

    Returns
    -------
    matplotlib.figure.Figure

    Examples
    --------
    >>> import warnings
    >>> import complexity as cx
    >>> from complexity import profiles
    >>> X, y = cx.datasets.pressure_sensor()
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     r = cx.sweep(cx.PolynomialLadder(range(0, 6)), X, y, plan=cx.Bootstrap(30),
    ...                  random_state=0)
    >>> fig = profiles.plot_profile(profiles.profile(r, X, y, n_boot=50, random_state=0))
    >>> len(fig.axes)
    3
    """
    try:
        import matplotlib.figure
    except ImportError as exc:  # pragma: no cover - depends on the environment
        raise ModuleNotFoundError(
            'plot_profile needs matplotlib: pip install "complexity[plot]"'
        ) from exc
    needed = {"degree", "centre", "test_mse", "bias_sq", "variance"}
    if not isinstance(table, pd.DataFrame) or not needed <= set(table.columns):
        raise TypeError(
            f"table must be the DataFrame returned by profiles.profile (columns {sorted(needed)}); "
            f"got {_short_repr(table)}."
        )
    if ax is None:
        fig = matplotlib.figure.Figure(figsize=(10, 3.4), layout="constrained")
        axes = fig.subplots(1, 3, sharex=True)
    else:
        axes = list(ax)
        fig = axes[0].figure
    unit = f" ({y_units}²)" if y_units else ""
    for axis, column, title in zip(
        axes,
        ("test_mse", "bias_sq", "variance"),
        ("test error (out of bag)", "squared bias", "variance"),
    ):
        for degree, part in table.groupby("degree", sort=True):
            axis.plot(part["centre"], part[column], marker="o", label=f"degree {degree}")
        axis.set_title(title)
        axis.set_xlabel(f"bins along {table.attrs.get('along', 'x')} (equal counts)")
        axis.set_ylabel(column + unit)
    axes[1].axhline(0.0, color="0.6", linewidth=0.8)
    axes[0].legend(fontsize="small")
    return fig
