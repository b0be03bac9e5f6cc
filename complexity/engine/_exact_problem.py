"""What the exact engine reads from a problem: the ladder's design, and how failures read.

The ladder supplies its design (:meth:`complexity.ladders.Ladder.nested_design`); None means it
is not a least-squares ladder and the generic engine runs. Both the resampled fits
(:mod:`complexity.engine.linear`) and the fit on all data (:mod:`complexity.engine.full_fit`)
take the design from :func:`design_of` and word rank loss with :func:`rank_message`.
"""

from __future__ import annotations

import numpy as np

from .._contract import Problem
from ..lstsq.design import NestedDesign

__all__ = ["design_of", "not_served", "rank_message", "supports"]


def design_of(problem: Problem) -> NestedDesign | None:
    """The ladder's nested design, fixed from ``problem.design_X``; None without one.

    Sample weights are served: the engine multiplies them into every training weight
    (weighted least squares, :mod:`complexity.engine.linear`).

    Examples
    --------
    >>> import numpy as np
    >>> import complexity as cx
    >>> from complexity._contract import Problem
    >>> X = np.linspace(0, 1, 20)[:, None]
    >>> ladder = cx.PolynomialLadder(range(0, 3))
    >>> problem = Problem(ladder, ladder.build(X), X, X[:, 0], X, X[:, 0], cx.Bootstrap(5),
    ...                   np.random.SeedSequence(0), X)
    >>> design_of(problem).n_columns
    (1, 2, 3)
    """
    design_X = np.asarray(problem.design_X, dtype=np.float64)
    if design_X.ndim == 1:
        design_X = design_X[:, None]
    return problem.ladder.nested_design(design_X, problem.feature_names)


def supports(problem: Problem) -> bool:
    """True when the exact engine can serve ``problem`` (``design_of(problem) is not None``).

    Examples
    --------
    >>> import numpy as np
    >>> import complexity as cx
    >>> from complexity._contract import Problem
    >>> X = np.linspace(0, 1, 20)[:, None]
    >>> ladder = cx.FeatureLadder([1], order="correlation")
    >>> problem = Problem(ladder, ladder.build(X), X, X[:, 0], X, X[:, 0], cx.Bootstrap(5),
    ...                   np.random.SeedSequence(0), X)
    >>> supports(problem)
    False
    """
    return design_of(problem) is not None


def not_served(problem: Problem) -> str:
    """Why the exact engine refuses ``problem`` (its ladder has no least-squares design)."""
    return (
        f"the exact engine cannot serve {problem.ladder!r} here: it needs a ladder with a "
        "least-squares design (PolynomialLadder, or FeatureLadder with a fixed order and the "
        "default estimator)."
    )


def capacity_label(problem: Problem, c: int) -> str:
    """``"degree 3"``: the ladder's capacity name and the value at position ``c``."""
    return f"{problem.ladder.capacity_name} {problem.ladder.capacities[c]!r}"


def rank_message(problem: Problem, c: int, where: str) -> str:
    """Why capacity ``c`` failed: its ``where`` ("training", "full-data") design lost rank."""
    return (
        f"{where} design is numerically rank deficient at {capacity_label(problem, c)} (a column "
        "is a linear combination of earlier ones); least squares is not unique there"
    )
