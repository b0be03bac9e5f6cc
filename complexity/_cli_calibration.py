"""The command line's calibration outputs: bands of the chosen fit, planning the next measurement.

Both are for a polynomial sweep (``--degrees``) of one predictor; :mod:`complexity.cli` calls
them after the sweep. The numbers come from :mod:`complexity.bands` and
:mod:`complexity.design_plan`.
"""

from __future__ import annotations

import argparse
import re
import warnings
from pathlib import Path
from typing import Any

from .exceptions import InputError

__all__ = ["parse_design", "plan_designs", "write_bands"]

_DESIGN = re.compile(r"^\s*(\d+)\s*[xX]\s*(\d+)\s*$")


def _check_polynomial(result: Any, option: str) -> None:
    from ._refit import one_curve  # here, not at import: the CLI starts without scipy.stats

    if not one_curve(result):
        raise InputError(
            f"{option} needs a polynomial sweep (--degrees) of one predictor; drop {option} here"
        )


def parse_design(text: str) -> tuple[int, int]:
    """``"9x2"`` -> (9 set points, 2 readings each), spread evenly over the measured range.

    Examples
    --------
    >>> parse_design("9x2")
    (9, 2)
    """
    match = _DESIGN.match(text)
    if not match or int(match.group(1)) < 2 or int(match.group(2)) < 1:
        raise argparse.ArgumentTypeError(
            f"{text!r}: expected SET_POINTSxREPLICATES with at least 2 set points "
            "and 1 reading each, e.g. 9x2"
        )
    return int(match.group(1)), int(match.group(2))


def write_bands(result: Any, X: Any, y: Any, path: Path) -> None:
    """The chosen polynomial on 101 points across the measured range, with both t-based bands."""
    _check_polynomial(result, "--bands")
    import numpy as np
    import pandas as pd

    from .bands import CAUTION, predict

    low, high = result.metadata["x_range"][0]
    grid = np.linspace(low, high, 101)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        conf = predict(result, X, y, grid, interval="confidence")
        pred = predict(result, X, y, grid, interval="prediction")
    table = pd.DataFrame(
        {
            str(X.columns[0]) if hasattr(X, "columns") else "x": grid,
            "estimate": conf["estimate"].to_numpy(),
            "confidence_lower": conf["lower"].to_numpy(),
            "confidence_upper": conf["upper"].to_numpy(),
            "prediction_lower": pred["lower"].to_numpy(),
            "prediction_upper": pred["upper"].to_numpy(),
        }
    )
    with open(path, "w", encoding="utf-8", newline="") as handle:
        degree = conf.attrs.get("capacity", result.recommended)
        handle.write(f"# degree {degree}, 95% t-based bands (least squares). {CAUTION}\n")
        table.to_csv(handle, index=False)


def plan_designs(result: Any, X: Any, y: Any, designs: list[tuple[int, int]], target: float) -> str:
    """The planning table as text: each proposed design's largest and mean standard error of the
    chosen curve over the measured range, and the smallest one that meets ``target``."""
    _check_polynomial(result, "--plan-design")
    import numpy as np

    from .bands import CAUTION
    from .design_plan import smallest_design

    low, high = result.metadata["x_range"][0]
    options = [(np.linspace(low, high, k), r) for k, r in designs]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        table = smallest_design(result, X, y, options, target)
    table.index = [f"{k}x{r}" for k, r in designs]
    table.index.name = "design"
    chosen = table.attrs.get("chosen")
    verdict = (
        f"Smallest design meeting a standard error of {target:g} everywhere in the range: "
        f"{table.index[chosen]} ({int(table['n_measurements'].iloc[chosen])} readings)."
        if chosen is not None
        else f"None of the designs reaches a standard error of {target:g} everywhere in the range."
    )
    return "\n".join(
        [
            f"Planning the next measurement (degree {result.recommended}, set points spread "
            f"evenly over [{low:g}, {high:g}], noise from this sweep):",
            table.to_string(float_format=lambda v: f"{v:.4g}"),
            verdict,
            CAUTION,
        ]
    )
