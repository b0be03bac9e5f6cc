"""The conditioning view: how well-determined the fitted coefficients are, capacity by capacity.

Private (the front door is :mod:`complexity.plot`). The sweep records the condition number of
the stable design the fits use (Legendre polynomials of x mapped to [-1, 1], or centred and
scaled columns) and the coefficient size. For polynomial ladders, given the data, the view adds
what the raw power design (1, x, x², ... on the user's x) would have had, for comparison.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from ._figures_base import (
    COLOURS,
    _capacity_axis,
    _capacity_positions,
    _column,
    _legend,
    _mark_recommended,
    _recommended_position,
    _spread,
)
from ._text import ladder_kind

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.axes import Axes
    from numpy.typing import NDArray

    from .result import SweepResult

#: how the raw power design is scaled before its condition number is taken
RAW_SCALING = "columns scaled to unit length"

STABLE_LABEL = "stable basis the fits use (Legendre polynomials on [-1, 1] or scaled columns)"


def _diagnostic_columns(curves: pd.DataFrame) -> tuple[str | None, str | None]:
    """Find the conditioning and coefficient-size columns a sweep recorded, if any."""
    cond = next((c for c in curves.columns if "cond" in str(c).lower()), None)
    coef = next((c for c in curves.columns if "coef" in str(c).lower()), None)
    return cond, coef


def _has_diagnostics(result: SweepResult) -> bool:
    cond, coef = _diagnostic_columns(result.curves)
    return cond is not None or coef is not None


def _reliable_limit(n_columns: int) -> float:
    """Largest condition number a float64 SVD resolves to about 10% for this many columns.

    A backward-stable SVD returns the exact singular values of a matrix within ``||E||`` of
    the given one, with ``||E||`` a modest multiple (taken here as ``n_columns``) of
    ``eps * ||A||``, and Weyl's inequality moves each singular value by at most ``||E||``.
    With unit-length columns ``||A|| <= sqrt(n_columns)``, so the smallest singular value, and
    with it the condition number, keeps a relative error under about 10% while the condition
    number stays below ``1 / (10 * n_columns * eps)`` (common practice; the tests check it
    against exact rational arithmetic).
    """
    return 1.0 / (10.0 * max(n_columns, 1) * float(np.finfo(np.float64).eps))


def _raw_power_condition(
    X: NDArray[np.float64], degrees: list[int]
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Condition numbers of the raw power designs, with the limit float64 resolves for each.

    For each degree d the design holds every monomial of total degree <= d of the user's
    predictors (1, x, x², ... for one predictor), each column scaled to unit 2-norm (the
    scaling that comes within a factor sqrt(p) of the best diagonal one: van der Sluis 1969);
    its condition number is the ratio of its largest to smallest singular value. Each predictor
    is first divided by its largest absolute value, which changes only the column scales (so
    nothing overflows). Values above the limit are not resolved and are returned as ``inf``.

    Examples
    --------
    >>> import numpy as np
    >>> x = np.linspace(-1.0, 1.0, 50)[:, None]
    >>> values, _ = _raw_power_condition(x, [0, 1])
    >>> values.round(6).tolist()   # 1, then orthogonal columns: 1 and x are uncorrelated here
    [1.0, 1.0]
    """
    from .basis import total_degree_terms

    Xa = np.asarray(X, dtype=np.float64)
    top = np.max(np.abs(Xa), axis=0)
    U = Xa / np.where(top > 0, top, 1.0)
    terms = total_degree_terms(Xa.shape[1], max(degrees))
    columns = np.column_stack([np.prod(U ** np.array(t), axis=1) for t in terms])
    norms = np.linalg.norm(columns, axis=0)
    out, limits = np.empty(len(degrees)), np.empty(len(degrees))
    for i, d in enumerate(degrees):
        k = sum(1 for t in terms if sum(t) <= d)
        limits[i] = _reliable_limit(k)
        if np.any(norms[:k] == 0):
            out[i] = np.inf
            continue
        s = np.linalg.svd(columns[:, :k] / norms[:k], compute_uv=False)
        ratio = float(s[0] / s[-1]) if s[-1] > 0 else np.inf
        out[i] = ratio if ratio <= limits[i] else np.inf
    return out, limits


def _raw_design_for(result: SweepResult, X: Any) -> tuple[NDArray[np.float64], list[int]] | None:
    """The predictors and degrees for the raw-power comparison, or None where it does not apply."""
    if X is None or ladder_kind(result.metadata) != "polynomial":
        return None
    degrees = result.metadata.get("ladder", {}).get("degrees")
    if not degrees or list(degrees) != list(result.curves.index):
        return None
    from ._validation import check_X

    Xa, _ = check_X(X)
    n_expected = result.metadata.get("n_samples")
    if n_expected is not None and int(n_expected) != Xa.shape[0]:
        raise ValueError(
            f"X has {Xa.shape[0]} rows but the sweep used {n_expected}; pass the same data."
        )
    return Xa, [int(d) for d in degrees]


def _diagnostic_line(
    ax: Any, x: Any, values: Any, marker: str, colour: str, label: str, gid: str, ylabel: str
) -> Any:
    """One diagnostic curve on ``ax`` (log scale when it spans more than 30x); returns the line."""
    (line,) = ax.plot(x, values, marker=marker, color=COLOURS[colour], label=label, gid=gid)
    if _spread(np.asarray(values, dtype=np.float64)) > 30:
        ax.set_yscale("log")
    ax.set_ylabel(ylabel)
    return line


def _raw_line(ax: Any, x: NDArray[np.float64], raw: NDArray[np.float64], limits: Any) -> list[Any]:
    shown = np.where(np.isfinite(raw), raw, limits)
    (line,) = ax.plot(
        x,
        shown,
        marker="^",
        linestyle=(0, (4, 2)),
        color=COLOURS["test"],
        label=f"raw powers 1, x, x², … of your x ({RAW_SCALING}), for comparison",
        gid="raw-condition",
    )
    handles = [line]
    beyond = ~np.isfinite(raw)
    if beyond.any():
        (cut,) = ax.plot(
            x[beyond],
            shown[beyond],
            marker="^",
            markersize=10,
            linestyle="none",
            markerfacecolor="white",
            markeredgecolor=COLOURS["test"],
            clip_on=False,
            gid="raw-condition-beyond",
            label=f"raw powers past what double precision resolves (> {np.min(limits):.0e}): "
            "drawn at that limit",
        )
        handles.append(cut)
    ax.set_yscale("log")
    return handles


def _draw_conditioning(
    result: SweepResult, ax: Axes, *, X: Any = None, below: bool = False
) -> None:
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
                f"condition number of the {STABLE_LABEL}",
                "condition",
                f"condition number ({cond})",
            )
        )
        raw = _raw_design_for(result, X)
        if raw is not None:
            values, limits = _raw_power_condition(*raw)
            handles += _raw_line(ax, x, values, limits)
            ax.set_ylabel("condition number (2-norm)")
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
