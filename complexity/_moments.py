"""Per-point count, mean and spread: the one merge formula and the counts it works on.

Everything that accumulates residuals (a block's :class:`~complexity.accumulate.Tally`, the
running :class:`~complexity.accumulate.PointAccumulator`) keeps, per point and capacity, a count
``n``, a mean and ``M2``, the sum of squared deviations from the mean. Two such summaries of
disjoint sets of values combine exactly by the pairwise formula of Chan, Golub & LeVeque (1983)::

    n = n_a + n_b,   mean = mean_a + (mean_b - mean_a) n_b / n,
    M2 = M2_a + M2_b + (mean_b - mean_a)^2 n_a n_b / n

:func:`merge` is that formula, and it is the only one used: folding a single residual in is the
case ``n_b = 1, M2_b = 0`` (Welford's update), folding a dense slice of resamples is the case of
a slice's two-pass summary, and folding a block into the running totals is the general case.
Because it works on deviations from means, it keeps ``M2`` accurate where a plain sum of squares
would cancel (residuals far from zero with a small spread).

:class:`Counts` stores the counts: one number per point while every fit succeeded (every
capacity then scored the same resamples), widened to one per point and capacity at the first
failed fit. Readers always see shape (n_points, n_capacities) through :meth:`Counts.view`.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

__all__ = ["Counts", "merge"]


def merge(
    count: NDArray[np.float64],
    mean: NDArray[np.float64],
    m2: NDArray[np.float64],
    cnt_b: NDArray[np.float64] | float,
    mean_b: NDArray[np.float64],
    m2_b: NDArray[np.float64] | None = None,
) -> None:
    """Chan et al.'s merge of ``(cnt_b, mean_b, m2_b)`` into ``(count, mean, m2)``, in place.

    ``mean``, ``m2`` and ``mean_b`` have shape (rows, C); ``count`` has shape (rows, C) or
    (rows, 1) (counts shared by every capacity), ``cnt_b`` broadcasts against it. ``m2_b=None``
    means zeros (a single value per point). Where ``cnt_b`` is 0, ``mean_b`` must be finite and
    is ignored.

    Examples
    --------
    Values {1, 3} merged with {5}: mean 3, M2 = 8.

    >>> import numpy as np
    >>> n, mean, m2 = np.array([[2.0]]), np.array([[2.0]]), np.array([[2.0]])
    >>> merge(n, mean, m2, 1.0, np.array([[5.0]]))
    >>> n.item(), mean.item(), m2.item()
    (3.0, 3.0, 8.0)
    """
    total = count + cnt_b
    share = np.divide(cnt_b, total, out=np.zeros(total.shape), where=total > 0)
    delta = mean_b - mean
    step = delta * share
    mean += step
    # delta^2 n_a n_b / n = delta * (delta * share) * n_a
    step *= delta
    step *= count
    if m2_b is not None:
        step += m2_b
    m2 += step
    count[...] = total


class Counts:
    """How many resamples scored each point, per capacity (stored per point while uniform).

    Examples
    --------
    >>> import numpy as np
    >>> c = Counts(3, 2)
    >>> c.uniform, c.view().shape
    (True, (3, 2))
    >>> c.widen()
    >>> c.uniform
    False
    """

    def __init__(self, n_points: int, n_capacities: int) -> None:
        self.n_capacities = n_capacities
        self.values: NDArray[np.float64] = np.zeros((n_points, 1))

    @property
    def uniform(self) -> bool:
        """True while every capacity has the same count at every point."""
        return self.values.shape[1] == 1

    def widen(self) -> None:
        """Switch to one count per point and capacity (at the first failed fit)."""
        if self.uniform:
            self.values = np.repeat(self.values, self.n_capacities, axis=1)

    def view(self) -> NDArray[np.float64]:
        """Shape (n_points, n_capacities); read-only (a broadcast) while uniform."""
        if self.uniform:
            return np.broadcast_to(self.values, (self.values.shape[0], self.n_capacities))
        return self.values

    def copy(self) -> Counts:
        """An independent copy."""
        out = Counts(0, self.n_capacities)
        out.values = self.values.copy()
        return out
