"""The fits view: the data, the curves fitted near the recommended capacity, and a refit band.

Private (the front door is :mod:`complexity.plot`). The models are refitted from the ladder
(rebuilt from the result's description for polynomial and plain feature ladders).
"""

from __future__ import annotations

import numbers
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from ._figures_base import COLOURS, _legend, _recommended_position, _with_units
from ._text import capacity_words
from ._validation import _short_repr

if TYPE_CHECKING:  # pragma: no cover
    from matplotlib.axes import Axes

    from .ladders import Ladder
    from .result import SweepResult


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


def _fits_available(result: SweepResult, X: Any, ladder: Ladder | None = None) -> bool:
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
