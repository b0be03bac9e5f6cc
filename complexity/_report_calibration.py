"""The report's calibration section: the chosen polynomial across the measured range.

Drawn for a polynomial sweep of one predictor when the report is given the data: bands for the
chosen fit (textbook t-based confidence and prediction bands, and the band that includes choosing
the degree, :mod:`complexity.bands`), squared bias, variance and test error along the range
(:mod:`complexity.profiles`), and the learning curve (:mod:`complexity.design_plan`). The table
and figure helpers come from :mod:`complexity.report`, which calls this module (so this module
never imports it back).
"""

from __future__ import annotations

import warnings
from collections.abc import Callable
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from ._refit import one_curve

if TYPE_CHECKING:
    from .result import SweepResult

__all__ = ["calibration_section"]


def _bands(result: SweepResult, X: Any, y: Any) -> pd.DataFrame:
    from .bands import predict

    low, high = result.metadata["x_range"][0]
    grid = np.linspace(low, high, 9)
    out = {}
    for kind in ("confidence", "prediction", "selection"):
        options: dict[str, Any] = {"n_boot": 200, "random_state": 0} if kind == "selection" else {}
        band = predict(result, X, y, grid, interval=kind, **options)
        if kind == "confidence":
            out["estimate"] = band["estimate"].to_numpy()
        out[f"{kind} lower"] = band["lower"].to_numpy()
        out[f"{kind} upper"] = band["upper"].to_numpy()
    return pd.DataFrame(out, index=pd.Index(np.round(grid, 10), name="x"))


def _learning(result: SweepResult, X: Any, y: Any) -> pd.DataFrame | None:
    from .design_plan import learning_curve

    n = int(result.metadata.get("n_samples") or 0)
    sizes = sorted({round(f * n) for f in (0.4, 0.6, 0.8)} - {0, 1, n})
    if len(sizes) < 2:
        return None
    curve = learning_curve(result, X, y, sizes, n_repeats=50, random_state=0)
    near = [d for d in curve["degree"].unique() if abs(d - result.recommended) <= 1]
    table = curve[curve["degree"].isin(near)].pivot(
        index="size", columns="degree", values="test_mse"
    )
    table.columns = [f"test error, degree {d}" for d in table.columns]
    return table


def calibration_section(
    result: SweepResult,
    X: Any,
    y: Any,
    *,
    table: Callable[..., str],
    figure: Callable[[str, Any, str], str],
    esc: Callable[[Any], str],
    y_units: str | None = None,
) -> str:
    """The HTML section, or an empty string where it does not apply (see the module notes).

    Examples
    --------
    >>> import complexity as cx
    >>> from complexity.report import render_report
    >>> X, y = cx.datasets.pressure_sensor()
    >>> r = cx.sweep(cx.PolynomialLadder(range(0, 4)), X, y, plan=cx.Bootstrap(10), random_state=0)
    >>> 'id="calibration"' in render_report(r, X=X, y=y, band_resamples=10)
    True
    """
    if X is None or y is None or not one_curve(result):
        return ""
    from .profiles import plot_profile, profile

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        bands = _bands(result, X, y)
        prof = profile(result, X, y, n_boot=100, random_state=0)
        learning = _learning(result, X, y)
    chosen = prof[prof["degree"] == result.recommended].set_index("bin")
    shown = chosen[["low", "high", "count", "test_mse", "bias_sq", "variance"]]
    parts = [
        '<section id="calibration">',
        f"<h2>The chosen fit across the range (degree {esc(result.recommended)})</h2>",
        '<div class="caution"><p>Bands and profiles hold only inside the measured range of x '
        "(no extrapolation beyond it); the cautions at the end of this report apply to every "
        "figure here.</p></div>",
        "<h3>Bands</h3>",
        "<p>95 % bands at nine points across the measured range: for the mean response "
        "(confidence), for one new reading (prediction), both t-based from the least-squares "
        "covariance of the chosen fit, and a band for the mean that also carries the "
        "uncertainty of choosing the degree (the whole choose-then-fit procedure bootstrapped "
        "200 times; it is centred on the bootstrap average of the chosen fits).</p>",
        table(bands, index_name="x"),
        "<h3>Where in the range the fit is weak</h3>",
        "<p>Squared bias, variance and test error of the chosen degree and its neighbours in "
        "bins of equal count along x (bootstrap, 100 resamples). A bin whose squared bias is "
        "below zero is one where the noise estimate exceeds what that bin's error leaves.</p>",
        figure(
            "profile",
            plot_profile(prof, y_units=y_units),
            "Squared bias, variance and test error along the range, per degree.",
        ),
        table(shown, index_name="bin"),
    ]
    if learning is not None:
        parts += [
            "<h3>More data or more capacity?</h3>",
            "<p>Test error at smaller training sizes (50 random subsets each, scored on the rest "
            "of the data), for the chosen degree and its neighbours. A curve still falling at "
            "the largest size says more measurements would still help at that degree.</p>",
            table(learning, index_name="training size"),
        ]
    parts.append("</section>")
    return "\n".join(parts)
