"""Designs: how a least-squares ladder turns X into nested columns, and the way back.

A :class:`NestedDesign` is fixed once from the full data (so every resample uses the same
columns) and knows three things, each in one place:

- :meth:`~NestedDesign.transform`: X -> the stable design ``Z`` with every column any capacity
  uses (the graded Legendre basis of mapped x, or ``[1, (X - center) / scale]``);
- :attr:`~NestedDesign.n_columns`: the leading columns each capacity uses;
- :meth:`~NestedDesign.to_user_matrix`: the matrix taking coefficients on a leading block of
  ``Z`` back to the user's units (power basis, or raw predictors).

Ladders hand out their design (:meth:`complexity.ladders.Ladder.nested_design`); the exact
engine, the full-data fit and the coefficient tables all read it from there.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .._validation import _short_repr
from ..basis import PolynomialBasis
from .nested import as_float_array

__all__ = ["FeatureDesign", "NestedDesign", "PolynomialDesign", "scaled_design"]


class NestedDesign:
    """Base of the designs of least-squares ladders (see the module notes).

    Attributes
    ----------
    n_columns : tuple of int
        Design columns used at each capacity, in ladder order.
    """

    n_columns: tuple[int, ...]

    @property
    def n_design(self) -> int:
        """Columns of the largest capacity (what :meth:`transform` returns)."""
        return max(self.n_columns)

    def transform(self, X: NDArray[np.float64]) -> NDArray[np.float64]:
        """The design ``Z(X)`` with every column any capacity uses, shape (n, n_design)."""
        raise NotImplementedError

    def to_user_matrix(self, k: int) -> NDArray[np.float64]:
        """Matrix ``T`` (k, k): user-unit coefficients = ``T @`` coefficients on ``Z[:, :k]``."""
        raise NotImplementedError

    def terms(self, k: int) -> list[Any]:
        """What each of the first ``k`` user-unit coefficients multiplies."""
        raise NotImplementedError

    def labels(self, names: list[str], k: int) -> list[str]:
        """Readable names of the first ``k`` user-unit terms, from the predictors' ``names``."""
        raise NotImplementedError

    def _check_k(self, k: int) -> int:
        if not 1 <= int(k) <= self.n_design:
            raise ValueError(f"n_columns must lie in 1..{self.n_design}; got {k}.")
        return int(k)


@dataclass(frozen=True)
class PolynomialDesign(NestedDesign):
    """The graded Legendre basis of :class:`~complexity.basis.PolynomialBasis`.

    Examples
    --------
    >>> import numpy as np
    >>> from complexity.basis import PolynomialBasis
    >>> d = PolynomialDesign(PolynomialBasis(2).fit([0.0, 2.0]), (1, 2, 3))
    >>> d.transform(np.array([[1.0], [2.0]]))
    array([[ 1. ,  0. , -0.5],
           [ 1. ,  1. ,  1. ]])
    >>> d.to_user_matrix(2)          # P1(t) = t = x - 1
    array([[ 1., -1.],
           [ 0.,  1.]])
    >>> d.labels(["x"], 3)
    ['1', 'x', 'x^2']
    """

    basis: PolynomialBasis
    n_columns: tuple[int, ...]

    def transform(self, X: NDArray[np.float64]) -> NDArray[np.float64]:
        return self.basis.transform(X)[:, : self.n_design]

    def to_user_matrix(self, k: int) -> NDArray[np.float64]:
        return self.basis.monomial_matrix(self._check_k(k))

    def terms(self, k: int) -> list[Any]:
        return list(self.basis.terms_[: self._check_k(k)])

    def labels(self, names: list[str], k: int) -> list[str]:
        out = []
        for exps in self.terms(k):
            parts = [names[j] if e == 1 else f"{names[j]}^{e}" for j, e in enumerate(exps) if e]
            out.append("*".join(parts) if parts else "1")
        return out

    def conversion_growth(self, k: int) -> float:
        """How much rounding the power basis of the first ``k`` terms amplifies, over the domain.

        For each predictor, the largest over the degrees e used of ``sum_m |a_me| r^m``, where
        ``a_me`` are the power coefficients of the mapped Legendre polynomial ``P_e`` and ``r``
        the largest ``|x|`` of the domain (``|P_e| <= 1`` there); a term of several predictors
        multiplies theirs. Evaluating the power-basis polynomial in float64 then loses about
        ``log10`` of this many digits (computed in floating point: an estimate; inf on overflow).

        Examples
        --------
        >>> from complexity.basis import PolynomialBasis
        >>> d = PolynomialDesign(PolynomialBasis(1).fit([0.0, 2.0]), (2,))
        >>> d.conversion_growth(2)          # P1 = x - 1 on [0, 2]: |x| + 1 <= 3
        3.0
        """
        terms = self.terms(k)
        growth = 1.0
        with np.errstate(over="ignore", invalid="ignore"):
            for j, (lo, hi) in enumerate(self.basis.domain_):
                growth *= _legendre_power_growth(max(t[j] for t in terms), lo, hi)
        return growth if np.isfinite(growth) else np.inf


def _legendre_power_growth(degree: int, lo: float, hi: float) -> float:
    """``max_{e <= degree} sum_m |a_me| r^m`` for ``P_e((2x - lo - hi) / (hi - lo))``.

    The power coefficients ``a_me`` follow Bonnet's recurrence with ``t = s x + o`` (a shift
    and add per step), in floating point: an estimate of the size, inf once it overflows.
    """
    s, o = 2.0 / (hi - lo), -(lo + hi) / (hi - lo)
    r = np.abs(np.array([lo, hi])).max() ** np.arange(degree + 1)
    prev, cur = np.zeros(degree + 1), np.zeros(degree + 1)
    cur[0] = 1.0  # P_0
    worst = 1.0
    for e in range(degree):
        t_cur = o * cur
        t_cur[1:] += s * cur[:-1]  # (o + s x) P_e(x)
        prev, cur = cur, ((2 * e + 1) * t_cur - e * prev) / (e + 1)
        size = float(np.sum(np.abs(cur) * r))
        if not np.isfinite(size):
            return np.inf
        worst = max(worst, size)
    return worst


@dataclass(frozen=True)
class FeatureDesign(NestedDesign):
    """Predictors centred and scaled for a stable factorisation, with the way back.

    With an intercept the design is ``[1, (X[:, columns] - center) / scale]`` (column means and
    root mean square deviations); without one it is ``X[:, columns] / scale`` (root mean
    squares, no centring, so the model still passes through the origin). Either way the column
    space of every leading block is that of the raw predictors (plus the constant), so the fits
    are unchanged.

    Attributes
    ----------
    columns : tuple of int
        Predictor positions, in order of entry.
    center, scale : ndarray of shape (len(columns),)
        Shift and scale of every predictor (``center`` is zero without an intercept).
    fit_intercept : bool
        Whether the first column of the design is the constant.
    n_columns : tuple of int
        Design columns used at each capacity.

    Examples
    --------
    >>> d = scaled_design([[1.0], [2.0], [3.0]], fit_intercept=True)
    >>> d.transform(np.array([[1.0], [2.0], [3.0]])).round(4)
    array([[ 1.    , -1.2247],
           [ 1.    ,  0.    ],
           [ 1.    ,  1.2247]])
    >>> d.to_user_matrix(2).round(4)
    array([[ 1.    , -2.4495],
           [ 0.    ,  1.2247]])
    """

    columns: tuple[int, ...]
    center: NDArray[np.float64]
    scale: NDArray[np.float64]
    fit_intercept: bool
    n_columns: tuple[int, ...]

    @classmethod
    def from_data(
        cls,
        X: NDArray[np.float64],
        columns: tuple[int, ...],
        n_columns: tuple[int, ...],
        *,
        fit_intercept: bool = True,
        strict: bool = True,
    ) -> FeatureDesign:
        """Centre and scale ``X[:, columns]``.

        A column without spread is refused (``strict``) or kept at scale 1, where it becomes a
        zero column that the factorisation reports as rank loss.
        """
        sub = X[:, list(columns)] if columns else np.empty((X.shape[0], 0))
        center = sub.mean(axis=0) if fit_intercept else np.zeros(sub.shape[1])
        scale = np.sqrt(np.mean((sub - center) ** 2, axis=0))
        bad = np.flatnonzero(~(scale > 0))
        if bad.size and strict:
            j = int(bad[0])
            what = "constant" if fit_intercept else "all zero"
            raise ValueError(
                f"X column {columns[j]} is {what} (every value is {sub[0, j]!r}); it cannot be a "
                "predictor here. Drop it."
            )
        scale = np.where(scale > 0, scale, 1.0)
        return cls(tuple(columns), center, scale, bool(fit_intercept), tuple(n_columns))

    def transform(self, X: NDArray[np.float64]) -> NDArray[np.float64]:
        body = (X[:, list(self.columns)] - self.center) / self.scale
        if not self.fit_intercept:
            return body
        return np.column_stack([np.ones(X.shape[0]), body])

    def to_user_matrix(self, k: int) -> NDArray[np.float64]:
        k = self._check_k(k)
        P = self.n_design
        T = np.zeros((P, P))
        off = 1 if self.fit_intercept else 0
        if self.fit_intercept:
            T[0, 0] = 1.0
            T[0, 1:] = -self.center / self.scale
        T[np.arange(off, P), np.arange(off, P)] = 1.0 / self.scale
        return T[:k, :k]

    def terms(self, k: int) -> list[Any]:
        head: list[Any] = ["intercept"] if self.fit_intercept else []
        return (head + list(self.columns))[: self._check_k(k)]

    def labels(self, names: list[str], k: int) -> list[str]:
        return [t if isinstance(t, str) else names[t] for t in self.terms(k)]


def scaled_design(X: ArrayLike, *, fit_intercept: bool = True) -> FeatureDesign:
    """Centre and scale every predictor of ``X`` (see :class:`FeatureDesign`), one capacity.

    Parameters
    ----------
    X : array-like of shape (n_samples, n_features)
        Predictors, in the order they enter.
    fit_intercept : bool, default=True
        Put a constant first column in the design (and centre the predictors).

    Returns
    -------
    FeatureDesign
        With one capacity using every column.

    Examples
    --------
    >>> scaled_design([[3.0], [4.0]], fit_intercept=False).scale.round(4)
    array([3.5355])
    """
    if not isinstance(fit_intercept, (bool, np.bool_)):
        raise TypeError(f"fit_intercept must be True or False; got {_short_repr(fit_intercept)}.")
    Xa = as_float_array(X, "X", 2)
    p = Xa.shape[1]
    top = p + (1 if fit_intercept else 0)
    return FeatureDesign.from_data(
        Xa, tuple(range(p)), (top,), fit_intercept=bool(fit_intercept), strict=True
    )
