"""Numerically stable polynomial bases.

Raw powers ``1, x, x**2, ...`` are nearly collinear, badly so when x is far from zero, and a least
squares fit on them loses digits fast as the degree grows. This module maps every predictor
affinely onto [-1, 1] and uses Legendre polynomials of the mapped variable instead; with several
predictors the columns are products of one Legendre polynomial per predictor, so degree ``d``
spans every polynomial of total degree <= d (interactions included).

Columns are ordered by total degree (degree 0 first, then every degree-1 term, then degree 2,
...), so the model of degree ``d`` always uses a leading block of the columns. That nesting is
what lets one QR factorisation serve every degree (see :mod:`complexity.lstsq.nested`).

Fitted coefficients on this basis can be turned back into ordinary power-basis coefficients in the
user's own units with :meth:`PolynomialBasis.power_coefficients` (one predictor) or
:meth:`PolynomialBasis.monomial_coefficients` (any number of predictors). The conversion matrix is
computed in exact rational arithmetic (:mod:`complexity.lstsq._rational`) and rounded once.
"""

from __future__ import annotations

import itertools
import math
import numbers
from fractions import Fraction
from typing import Any

import numpy as np
from numpy.polynomial import legendre
from numpy.typing import ArrayLike, NDArray
from sklearn.base import BaseEstimator, TransformerMixin
from sklearn.utils.validation import check_array, check_is_fitted

from ._validation import _short_repr
from .lstsq._rational import exact_matvec, monomial_matrix

__all__ = ["LegendreFeatures", "PolynomialBasis", "n_total_degree_terms", "total_degree_terms"]


# --------------------------------------------------------------------------------------------
# small pure helpers
# --------------------------------------------------------------------------------------------


def _check_degree(degree: Any, name: str = "degree") -> int:
    if isinstance(degree, bool) or not isinstance(degree, numbers.Integral):
        raise TypeError(
            f"{name} must be a whole number >= 0 (an int); got {_short_repr(degree)} "
            f"of type {type(degree).__name__}."
        )
    if degree < 0:
        raise ValueError(f"{name} must be a whole number >= 0; got {int(degree)}.")
    return int(degree)


def n_total_degree_terms(n_features: int, degree: int) -> int:
    """Number of monomials of total degree <= ``degree`` in ``n_features`` variables.

    Parameters
    ----------
    n_features : int
        Number of predictors (>= 1).
    degree : int
        Largest total degree (>= 0).

    Returns
    -------
    int
        ``C(n_features + degree, degree)``.

    Examples
    --------
    >>> n_total_degree_terms(1, 3)
    4
    >>> n_total_degree_terms(2, 2)
    6
    """
    n_features = _check_degree(n_features, "n_features")
    if n_features < 1:
        raise ValueError(f"n_features must be >= 1; got {n_features}.")
    degree = _check_degree(degree)
    return math.comb(n_features + degree, degree)


def total_degree_terms(n_features: int, degree: int) -> list[tuple[int, ...]]:
    """Exponent tuples of every monomial of total degree <= ``degree``, graded order.

    Terms come by total degree (0 first). Within one degree they follow the order of
    :class:`sklearn.preprocessing.PolynomialFeatures` (``x0**2, x0*x1, x1**2`` for two predictors).

    Parameters
    ----------
    n_features : int
        Number of predictors (>= 1).
    degree : int
        Largest total degree (>= 0).

    Returns
    -------
    list of tuple of int
        One exponent tuple (length ``n_features``) per term.

    Examples
    --------
    >>> total_degree_terms(2, 2)
    [(0, 0), (1, 0), (0, 1), (2, 0), (1, 1), (0, 2)]
    """
    n_total_degree_terms(n_features, degree)  # validates both arguments
    terms: list[tuple[int, ...]] = []
    for d in range(degree + 1):
        for combo in itertools.combinations_with_replacement(range(n_features), d):
            exps = [0] * n_features
            for j in combo:
                exps[j] += 1
            terms.append(tuple(exps))
    return terms


def _as_2d_float(X: ArrayLike, name: str = "X") -> NDArray[np.float64]:
    if X is None or isinstance(X, (str, bytes)):
        raise TypeError(f"{name} must be an array-like of numbers; got {_short_repr(X)}.")
    raw = np.asarray(X)
    if raw.dtype.kind == "b" or raw.dtype.kind not in "iuf":
        raise TypeError(
            f"{name} must hold real numbers; got an array of dtype {raw.dtype}. "
            "Convert it with numpy.asarray(X, dtype=float)."
        )
    arr = np.array(raw, dtype=np.float64, copy=True)
    if arr.ndim == 1:
        arr = arr.reshape(-1, 1)
    if arr.ndim != 2:
        raise ValueError(
            f"{name} must be 1-D or 2-D (n_samples, n_features); got shape {arr.shape}."
        )
    if arr.shape[0] == 0 or arr.shape[1] == 0:
        raise ValueError(
            f"{name} must have at least one row and one column; got shape {arr.shape}."
        )
    if not np.isfinite(arr).all():
        raise ValueError(f"{name} contains NaN or infinite values; remove or impute them first.")
    return arr


def _check_domain(domain: Any, n_features: int | None) -> NDArray[np.float64]:
    """Return the domain as an (n_features, 2) float array, checking every interval."""
    try:
        arr = np.array(domain, dtype=np.float64)
    except (TypeError, ValueError):
        raise TypeError(
            "domain must be a (low, high) pair or an array of shape (n_features, 2); "
            f"got {_short_repr(domain)}."
        ) from None
    if arr.ndim == 1 and arr.shape == (2,):
        arr = np.tile(arr, (n_features or 1, 1))
    if arr.ndim != 2 or arr.shape[1] != 2:
        raise ValueError(
            "domain must be a (low, high) pair or an array of shape (n_features, 2); "
            f"got {_short_repr(domain)} (shape {arr.shape})."
        )
    if n_features is not None and arr.shape[0] != n_features:
        raise ValueError(
            f"domain has {arr.shape[0]} interval(s) but X has {n_features} column(s); "
            "give one (low, high) row per column."
        )
    for j, (lo, hi) in enumerate(arr):
        if not (np.isfinite(lo) and np.isfinite(hi)):
            raise ValueError(f"domain for column {j} must be finite; got {(lo, hi)!r}.")
        if not hi > lo:
            raise ValueError(
                f"domain for column {j} is degenerate or reversed: {(float(lo), float(hi))!r}; "
                "low must be < high."
            )
    return arr


def _data_domain(X: NDArray[np.float64]) -> NDArray[np.float64]:
    lo, hi = X.min(axis=0), X.max(axis=0)
    flat = np.flatnonzero(hi <= lo)
    if flat.size:
        j = int(flat[0])
        raise ValueError(
            f"X column {j} is constant (every value is {X[0, j]!r}), so its domain "
            f"({lo[j]!r}, {hi[j]!r}) is degenerate and cannot be mapped onto [-1, 1]. "
            "Drop the column, or pass domain=... explicitly."
        )
    return np.column_stack([lo, hi])


def _map_to_window(X: NDArray[np.float64], domain: NDArray[np.float64]) -> NDArray[np.float64]:
    """t = (2 x - (a + b)) / (b - a), column by column."""
    a, b = domain[:, 0], domain[:, 1]
    return (2.0 * X - (a + b)) / (b - a)


def _legendre_columns(
    T: NDArray[np.float64], terms: list[tuple[int, ...]], degree: int
) -> NDArray[np.float64]:
    """Product-Legendre design on mapped data ``T`` (n, p) for the given exponent tuples."""
    vanders = [legendre.legvander(T[:, j], degree) for j in range(T.shape[1])]
    out = np.empty((T.shape[0], len(terms)), dtype=np.float64)
    for c, exps in enumerate(terms):
        col = np.ones(T.shape[0])
        for j, e in enumerate(exps):
            if e:
                col = col * vanders[j][:, e]
        out[:, c] = col
    return out


# --------------------------------------------------------------------------------------------
# the basis object
# --------------------------------------------------------------------------------------------


class PolynomialBasis:
    """Legendre polynomials of mapped predictors, nested by total degree.

    Each column ``x_j`` of X is mapped onto [-1, 1] by
    ``t_j = (2 x_j - (a_j + b_j)) / (b_j - a_j)``, with ``[a_j, b_j]`` the data range (or
    ``domain``). The column for the exponent tuple ``(e_1, ..., e_p)`` is
    ``P_{e_1}(t_1) * ... * P_{e_p}(t_p)`` with ``P_e`` the Legendre polynomial of degree ``e``.
    Columns come by total degree, so the first :meth:`n_columns` ``(d)`` of them span exactly
    the polynomials of total degree <= d.

    Parameters
    ----------
    degree : int
        Largest total degree (>= 0).
    domain : array-like of shape (2,) or (n_features, 2), optional
        Interval mapped onto [-1, 1] for each column. A single pair applies to every column.
        Default: each column's data range in :meth:`fit`. Fix it once (from the full data) when
        the same basis must serve several resamples.

    Attributes
    ----------
    domain_ : ndarray of shape (n_features, 2)
        The intervals used.
    n_features_in_ : int
        Number of predictors seen in :meth:`fit`.
    terms_ : list of tuple of int
        Exponent tuple of every column, in column order.

    Examples
    --------
    >>> import numpy as np
    >>> x = np.linspace(1e6, 1e6 + 1, 5)[:, None]        # far from zero: raw powers would fail
    >>> basis = PolynomialBasis(degree=2).fit(x)
    >>> basis.terms_
    [(0,), (1,), (2,)]
    >>> np.round(basis.transform(x), 3)
    array([[ 1.   , -1.   ,  1.   ],
           [ 1.   , -0.5  , -0.125],
           [ 1.   ,  0.   , -0.5  ],
           [ 1.   ,  0.5  , -0.125],
           [ 1.   ,  1.   ,  1.   ]])
    """

    def __init__(self, degree: int, domain: ArrayLike | None = None) -> None:
        self.degree = _check_degree(degree)
        self.domain = domain

    # -- fitting ------------------------------------------------------------------------------
    def fit(self, X: ArrayLike) -> PolynomialBasis:
        """Fix the domain of every column (from the data unless ``domain`` was given).

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features) or (n_samples,)
            Predictors; a 1-D array is one predictor.

        Returns
        -------
        PolynomialBasis
            ``self``.

        Raises
        ------
        ValueError
            If a column is constant and no domain was given (a degenerate domain), or if a given
            interval is degenerate, reversed or of the wrong shape.

        Examples
        --------
        >>> PolynomialBasis(degree=1).fit([[0.0], [4.0]]).domain_
        array([[0., 4.]])
        """
        Xa = _as_2d_float(X)
        if self.domain is None:
            self.domain_ = _data_domain(Xa)
        else:
            self.domain_ = _check_domain(self.domain, Xa.shape[1])
        self.n_features_in_ = Xa.shape[1]
        self.terms_ = total_degree_terms(self.n_features_in_, self.degree)
        return self

    def _check_fitted(self) -> None:
        if not hasattr(self, "domain_"):
            raise RuntimeError(
                "This PolynomialBasis is not fitted yet; call fit(X) before using it."
            )

    def n_columns(self, degree: int | None = None) -> int:
        """Number of columns of total degree <= ``degree`` (default: the basis degree).

        Parameters
        ----------
        degree : int, optional
            Total degree, 0 <= degree <= ``self.degree``.

        Returns
        -------
        int

        Examples
        --------
        >>> import numpy as np
        >>> basis = PolynomialBasis(degree=3).fit(np.random.default_rng(0).random((10, 2)))
        >>> [basis.n_columns(d) for d in range(4)]
        [1, 3, 6, 10]
        """
        self._check_fitted()
        degree = self.degree if degree is None else _check_degree(degree)
        if degree > self.degree:
            raise ValueError(
                f"degree must be <= the basis degree {self.degree}; got {degree}. "
                "Build the basis with a larger degree."
            )
        return n_total_degree_terms(self.n_features_in_, degree)

    def transform(self, X: ArrayLike) -> NDArray[np.float64]:
        """Evaluate every column of the basis at X.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features) or (n_samples,)
            Points to evaluate (points outside the domain are allowed: that is extrapolation).

        Returns
        -------
        ndarray of shape (n_samples, n_columns())
            Columns in the order of :attr:`terms_`.

        Examples
        --------
        >>> basis = PolynomialBasis(degree=1, domain=(0.0, 2.0)).fit([[0.0], [2.0]])
        >>> basis.transform([[1.0], [2.0]])
        array([[1., 0.],
               [1., 1.]])
        """
        self._check_fitted()
        Xa = _as_2d_float(X)
        if Xa.shape[1] != self.n_features_in_:
            raise ValueError(
                f"X has {Xa.shape[1]} column(s) but the basis was fitted on "
                f"{self.n_features_in_}; pass the same predictors."
            )
        return _legendre_columns(_map_to_window(Xa, self.domain_), self.terms_, self.degree)

    def fit_transform(self, X: ArrayLike) -> NDArray[np.float64]:
        """Fit the domain, then transform the same X.

        Examples
        --------
        >>> PolynomialBasis(degree=2).fit_transform([0.0, 1.0, 2.0]).shape
        (3, 3)
        """
        return self.fit(X).transform(X)

    # -- back to the user's units ---------------------------------------------------------------
    def _coef_length(self, n: int) -> int:
        self._check_fitted()
        if not 1 <= n <= len(self.terms_):
            raise ValueError(
                f"expected between 1 and {len(self.terms_)} basis coefficients; got {n}."
            )
        return n

    def _exact_matrix(self, k: int) -> list[list[Fraction]]:
        """The exact change of basis for the first ``k`` columns (kept per terms and domain)."""
        domain = tuple((float(lo), float(hi)) for lo, hi in self.domain_)
        return monomial_matrix(tuple(self.terms_[:k]), domain)

    def monomial_matrix(self, n_columns: int | None = None) -> NDArray[np.float64]:
        """Matrix turning basis coefficients into monomial coefficients in original units.

        If ``c`` are coefficients on the first ``n_columns`` basis columns, ``M @ c`` are the
        coefficients of the monomials ``terms_[:n_columns]`` in the original (unmapped) x.
        Because columns are graded by degree, a leading block of columns only ever needs the same
        leading block of monomials. The matrix is computed exactly and rounded once.

        Parameters
        ----------
        n_columns : int, optional
            Size of the leading block (default: all columns).

        Returns
        -------
        ndarray of shape (n_columns, n_columns)

        Examples
        --------
        >>> basis = PolynomialBasis(degree=1, domain=(0.0, 2.0)).fit([[0.0], [2.0]])
        >>> basis.monomial_matrix()      # P1(t) = t = x - 1
        array([[ 1., -1.],
               [ 0.,  1.]])
        """
        k = self._coef_length(len(self.terms_) if n_columns is None else int(n_columns))
        M = self._exact_matrix(k)
        return np.array([[float(v) for v in row] for row in M], dtype=np.float64)

    def exact_monomials(self, *coef_parts: ArrayLike) -> dict[tuple[int, ...], Fraction]:
        """Exact rational monomial coefficients of the sum of one or more coefficient vectors.

        Passing a vector and a small correction (``c``, ``delta``) converts ``c + delta`` without
        first rounding the sum to float; iterative refinement uses this.

        Parameters
        ----------
        *coef_parts : array-like of shape (k,)
            Coefficients on the first ``k`` basis columns (all parts the same length).

        Returns
        -------
        dict
            ``{exponents: fractions.Fraction}`` for the monomials ``terms_[:k]``.

        Examples
        --------
        >>> basis = PolynomialBasis(degree=1, domain=(0.0, 3.0)).fit([[0.0], [3.0]])
        >>> basis.exact_monomials([0.0, 1.0])      # P1(t) = (2x - 3) / 3
        {(0,): Fraction(-1, 1), (1,): Fraction(2, 3)}
        """
        if not coef_parts:
            raise TypeError("exact_monomials needs at least one coefficient vector.")
        parts = tuple(np.asarray(c, dtype=np.float64).ravel() for c in coef_parts)
        k = self._coef_length(parts[0].size)
        if any(p.size != k for p in parts):
            raise ValueError(
                "every coefficient vector must have the same length; "
                f"got {[p.size for p in parts]}."
            )
        if not all(np.isfinite(p).all() for p in parts):
            raise ValueError("coefficients contain NaN or infinite values.")
        return dict(zip(self.terms_[:k], exact_matvec(self._exact_matrix(k), parts)))

    def monomial_coefficients(self, coef: ArrayLike) -> dict[tuple[int, ...], float]:
        """Coefficients of monomials in original units, keyed by exponent tuple.

        Parameters
        ----------
        coef : array-like of shape (k,)
            Coefficients on the first ``k`` basis columns.

        Returns
        -------
        dict
            ``{exponents: coefficient}`` for the monomials ``terms_[:k]``. The products and sums
            are done exactly; each value is rounded once.

        Examples
        --------
        >>> import numpy as np
        >>> rng = np.random.default_rng(0)
        >>> X = rng.random((20, 2))
        >>> basis = PolynomialBasis(degree=1).fit(X)
        >>> y = 3 + 2 * X[:, 0] - X[:, 1]
        >>> c = np.linalg.lstsq(basis.transform(X), y, rcond=None)[0]
        >>> {k: round(v, 6) for k, v in basis.monomial_coefficients(c).items()}
        {(0, 0): 3.0, (1, 0): 2.0, (0, 1): -1.0}
        """
        return {t: float(v) for t, v in self.exact_monomials(coef).items()}

    def power_coefficients(self, coef: ArrayLike) -> NDArray[np.float64]:
        """Ordinary power-basis coefficients ``b_0 + b_1 x + b_2 x**2 + ...`` (one predictor).

        Parameters
        ----------
        coef : array-like of shape (d + 1,)
            Coefficients on the first ``d + 1`` Legendre columns.

        Returns
        -------
        ndarray of shape (d + 1,)
            Power coefficients in the original units of x, lowest power first.

        Examples
        --------
        >>> import numpy as np
        >>> x = np.linspace(10.0, 11.0, 7)
        >>> y = 1 - 2 * x + 0.5 * x**2
        >>> basis = PolynomialBasis(degree=2).fit(x)
        >>> c = np.linalg.lstsq(basis.transform(x), y, rcond=None)[0]
        >>> np.round(basis.power_coefficients(c), 8)
        array([ 1. , -2. ,  0.5])
        """
        self._check_fitted()
        if self.n_features_in_ != 1:
            raise ValueError(
                f"power_coefficients needs one predictor; this basis has {self.n_features_in_}. "
                "Use monomial_coefficients for several predictors."
            )
        mono = self.monomial_coefficients(coef)
        return np.array(list(mono.values()), dtype=np.float64)

    def __repr__(self) -> str:
        return f"PolynomialBasis(degree={self.degree!r}, domain={self.domain!r})"


# --------------------------------------------------------------------------------------------
# scikit-learn transformer
# --------------------------------------------------------------------------------------------


class LegendreFeatures(TransformerMixin, BaseEstimator):
    """scikit-learn transformer producing the Legendre columns of :class:`PolynomialBasis`.

    ``Pipeline([("legendre", LegendreFeatures(d, domain)), ("ls",
    LinearRegression(fit_intercept=False))])`` fits a polynomial of degree ``d`` stably; the
    constant column ``P_0 = 1`` is part of the output, so the regression needs no intercept.

    Parameters
    ----------
    degree : int, default=1
        Largest total degree; every column of total degree <= ``degree`` is returned.
    domain : array-like of shape (2,) or (n_features, 2), optional
        Interval mapped onto [-1, 1] for each column. Pass the range of the FULL data so every
        resampled training set uses the same basis; if None, ``fit`` uses the training data range.

    Attributes
    ----------
    basis_ : PolynomialBasis
        The fitted basis.
    n_features_in_ : int
        Number of predictors seen in ``fit``.

    Examples
    --------
    >>> import numpy as np
    >>> from sklearn.linear_model import LinearRegression
    >>> from sklearn.pipeline import make_pipeline
    >>> x = np.linspace(1e6, 1e6 + 1, 30)[:, None]
    >>> y = np.cos(2 * (x[:, 0] - 1e6))
    >>> model = make_pipeline(LegendreFeatures(9, domain=(1e6, 1e6 + 1)),
    ...                       LinearRegression(fit_intercept=False)).fit(x, y)
    >>> bool(np.max(np.abs(model.predict(x) - y)) < 1e-6)
    True
    """

    def __init__(self, degree: int = 1, domain: ArrayLike | None = None) -> None:
        self.degree = degree
        self.domain = domain

    def fit(self, X: ArrayLike, y: ArrayLike | None = None) -> LegendreFeatures:
        """Fix the basis (the domain given, or the range of X).

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)
            Predictors (2-D, as everywhere in scikit-learn). Without ``domain`` at least two
            samples are needed, and no column may be constant.
        y : ignored

        Returns
        -------
        LegendreFeatures
            ``self``.

        Examples
        --------
        >>> LegendreFeatures(2).fit([[0.0], [1.0], [2.0]]).basis_.domain_
        array([[0., 2.]])
        """
        Xa = check_array(X, dtype=np.float64, ensure_min_samples=2 if self.domain is None else 1)
        self.basis_ = PolynomialBasis(self.degree, self.domain).fit(Xa)
        self.n_features_in_ = self.basis_.n_features_in_
        return self

    def transform(self, X: ArrayLike) -> NDArray[np.float64]:
        """Return every Legendre column of total degree <= ``degree``.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)
            Predictors.

        Returns
        -------
        ndarray of shape (n_samples, C(n_features + degree, degree))

        Examples
        --------
        >>> LegendreFeatures(1, domain=(0.0, 2.0)).fit([[0.0]]).transform([[2.0]])
        array([[1., 1.]])
        """
        check_is_fitted(self, "basis_")
        Xa = check_array(X, dtype=np.float64)
        if Xa.shape[1] != self.n_features_in_:
            raise ValueError(
                f"X has {Xa.shape[1]} features, but {type(self).__name__} is expecting "
                f"{self.n_features_in_} features as input."
            )
        return self.basis_.transform(Xa)

    def get_feature_names_out(self, input_features: Any = None) -> NDArray[np.object_]:
        """Names like ``P2(x0)*P1(x1)`` for the output columns.

        Examples
        --------
        >>> LegendreFeatures(1).fit([[0.0, 1.0], [1.0, 0.0]]).get_feature_names_out().tolist()
        ['1', 'P1(x0)', 'P1(x1)']
        """
        check_is_fitted(self, "basis_")
        if input_features is None:
            names = [f"x{j}" for j in range(self.n_features_in_)]
        else:
            names = [str(v) for v in input_features]
        out = []
        for exps in self.basis_.terms_:
            parts = [f"P{e}({names[j]})" for j, e in enumerate(exps) if e]
            out.append("*".join(parts) if parts else "1")
        return np.asarray(out, dtype=object)
