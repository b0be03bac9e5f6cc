"""Which engine runs a sweep's problem, and the leverages its decomposition uses.

The exact least-squares engine serves ladders that hand out a nested design
(:meth:`~complexity.ladders.Ladder.nested_design`, weighted or not), the ridge engine a
``ParamLadder`` over ``Ridge(alpha)``, the generic engine everything else. Whichever engine
runs a least-squares ladder, the decomposition gets the same hat-matrix diagonals, so the
engines agree on every column.
"""

from __future__ import annotations

import warnings
from typing import Any

import numpy as np

from ._contract import Engine, FullFit, Problem
from ._validation import check_option
from .engine import generic as generic_engine
from .engine import linear as linear_engine
from .engine import ranked as ranked_engine
from .engine import ridge as ridge_engine

__all__ = ["ENGINES", "check_weight_support", "choose_engine", "leverage_for"]

#: The values of ``sweep(engine=...)``.
ENGINES = ("auto", "exact", "generic")


def _fits_exact(problem: Problem) -> bool:
    """Whether the exact least-squares engine can run this problem."""
    return linear_engine.supports(problem)


def choose_engine(engine: str, problem: Problem) -> tuple[Engine, str]:
    check_option("engine", engine, ENGINES)
    if engine == "generic":
        return generic_engine, "generic"
    if _fits_exact(problem):
        return linear_engine, "exact"
    if ridge_engine.supports(problem):
        return ridge_engine, "exact-ridge"
    if ranked_engine.supports(problem):
        return ranked_engine, "exact-ranked"
    if engine == "exact":
        raise ValueError(
            f"engine='exact' needs a least-squares ladder (PolynomialLadder, or FeatureLadder with "
            f"the default estimator) or a ParamLadder over Ridge(alpha) (optionally after one "
            f"StandardScaler); got {problem.ladder!r}. "
            "Use engine='auto' or 'generic'."
        )
    return generic_engine, "generic"


def check_weight_support(models: list[Any]) -> None:
    """Refuse sample_weight up front when a model's final step cannot take it."""
    from sklearn.utils.validation import has_fit_parameter

    for model in models:
        final = model.steps[-1][1] if hasattr(model, "steps") else model
        if not has_fit_parameter(final, "sample_weight"):
            raise TypeError(
                f"sample_weight was given, but {type(final).__name__}.fit takes no sample_weight; "
                "drop sample_weight or use an estimator whose fit accepts it."
            )


def leverage_for(full: FullFit | None, engine_used: str, problem: Problem) -> np.ndarray | None:
    """Hat-matrix diagonals of the full-data least-squares fits, whichever engine ran.

    The decomposition uses them for the closed-form variance of a point's average prediction, so
    the generic engine on a least-squares ladder gets the same numbers as the exact one. Ridge
    fits get none: for them sigma² h / (1 - h) is only an upper bound on that variance (the
    penalty shrinks it), so their variance comes from the resampling spread like any estimator's.
    """
    if full is None or engine_used == "exact-ridge":
        return None
    if engine_used == "exact" and problem.sample_weight is None:
        return full.leverage
    if not _fits_exact(problem):
        return None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the engine's own warnings were given by its run
        # weighted fits: the leverage whose h/(1-h) is their out-of-sample variance factor
        return linear_engine.variance_leverage(problem)
