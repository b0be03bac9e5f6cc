"""Exact rational arithmetic for polynomial coefficients in the user's units.

The stable basis (:mod:`complexity.basis`) fits Legendre polynomials of mapped x; turning those
coefficients into ordinary power-basis coefficients of the raw x is a change of basis whose
entries grow fast with the degree. Done in :class:`fractions.Fraction`, every product and sum
is exact and the only rounding is the final conversion of each value to float.

These helpers depend on nothing else in the package: callers pass exponent tuples and domains.
The cost grows steeply with the degree (big rationals), so callers bound the degree first
(:func:`complexity.lstsq.coefficients.power_basis_limit`).
"""

from __future__ import annotations

import functools
import itertools
import math
from fractions import Fraction

import numpy as np
from numpy.typing import NDArray

__all__ = ["exact_matvec", "exact_residuals", "legendre_to_power", "monomial_matrix"]

Terms = tuple[tuple[int, ...], ...]
Domain = tuple[tuple[float, float], ...]


@functools.lru_cache(maxsize=256)
def legendre_to_power(degree: int, low: float, high: float) -> tuple[tuple[Fraction, ...], ...]:
    """Exact matrix A with A[m][e] = coefficient of x**m in P_e((2x - (low+high)) / (high-low)).

    ``low`` and ``high`` are floats, hence exact rationals; every step is done in
    :class:`fractions.Fraction`, so the only rounding is the caller's final conversion to float.

    Examples
    --------
    >>> [[str(v) for v in row] for row in legendre_to_power(1, 0.0, 2.0)]   # P1(t) = x - 1
    [['1', '-1'], ['0', '1']]
    """
    lo, hi = Fraction(low), Fraction(high)
    s = Fraction(2) / (hi - lo)
    o = -(lo + hi) / (hi - lo)
    # Legendre coefficients in t (Bonnet recurrence), leg[e][k] = coef of t**k in P_e
    leg: list[list[Fraction]] = [[Fraction(1)] + [Fraction(0)] * degree]
    if degree >= 1:
        leg.append([Fraction(0), Fraction(1)] + [Fraction(0)] * (degree - 1))
    for e in range(1, degree):
        nxt = [Fraction(0)] * (degree + 1)
        for k in range(degree):
            nxt[k + 1] += Fraction(2 * e + 1, e + 1) * leg[e][k]
        for k in range(degree + 1):
            nxt[k] -= Fraction(e, e + 1) * leg[e - 1][k]
        leg.append(nxt)
    # expansion of t**k = (s x + o)**k: pw[k][m] = C(k, m) s**m o**(k-m)
    s_pows = [s**m for m in range(degree + 1)]
    o_pows = [o**m for m in range(degree + 1)]
    A = [[Fraction(0)] * (degree + 1) for _ in range(degree + 1)]
    for e in range(degree + 1):
        for k in range(e + 1):
            c = leg[e][k]
            if c == 0:
                continue
            for m in range(k + 1):
                A[m][e] += c * math.comb(k, m) * s_pows[m] * o_pows[k - m]
    return tuple(tuple(row) for row in A)


@functools.lru_cache(maxsize=64)
def _all_terms_matrix(
    terms: Terms, domain: Domain, degree: int
) -> tuple[tuple[Fraction, ...], ...]:
    per_dim = [legendre_to_power(degree, lo, hi) for lo, hi in domain]
    index = {t: i for i, t in enumerate(terms)}
    size = len(terms)
    M = [[Fraction(0)] * size for _ in range(size)]
    for c, exps in enumerate(terms):
        for m in itertools.product(*(range(e + 1) for e in exps)):
            value = Fraction(1)
            for j, (mj, ej) in enumerate(zip(m, exps)):
                value *= per_dim[j][mj][ej]
                if value == 0:
                    break
            if value != 0:
                M[index[m]][c] = value
    return tuple(tuple(row) for row in M)


def monomial_matrix(terms: Terms, domain: Domain) -> list[list[Fraction]]:
    """Exact matrix M with monomial coefficients (in original units) = M @ basis coefficients.

    Rows and columns are both indexed by ``terms``, a graded run of exponent tuples (total
    degree never decreasing, every term's lower-degree divisors earlier): column ``c`` is the
    product Legendre term ``terms[c]``, row ``r`` the monomial ``terms[r]``. A Legendre term
    only involves monomials of lower or equal degree, so M for a leading run of terms is the
    leading block of M for a longer run; the matrix is kept per (terms, domain).

    Examples
    --------
    >>> [[str(v) for v in row] for row in monomial_matrix(((0,), (1,)), ((0.0, 3.0),))]
    [['1', '-1'], ['0', '2/3']]
    """
    degree = max((sum(t) for t in terms), default=0)
    return [list(row) for row in _all_terms_matrix(tuple(terms), tuple(domain), degree)]


def exact_matvec(M: list[list[Fraction]], parts: tuple[NDArray[np.float64], ...]) -> list[Fraction]:
    """M @ (sum of the float vectors ``parts``), every product and sum exact.

    Examples
    --------
    >>> M = [[Fraction(1), Fraction(-1)], [Fraction(0), Fraction(1)]]
    >>> [str(v) for v in exact_matvec(M, (np.array([0.5, 1.0]), np.array([0.0, 0.25])))]
    ['-3/4', '5/4']
    """
    v = [sum((Fraction(float(p[j])) for p in parts), Fraction(0)) for j in range(len(parts[0]))]
    return [sum((row[j] * v[j] for j in range(len(v)) if row[j]), Fraction(0)) for row in M]


def exact_residuals(
    X: NDArray[np.float64],
    y: NDArray[np.float64],
    monomials: dict[tuple[int, ...], Fraction],
) -> NDArray[np.float64]:
    """``y - sum_t a_t x**t`` computed exactly in rational arithmetic, each entry rounded once.

    The cost is O(n_samples x n_terms) big-rational operations: meant for reporting one fit.

    Examples
    --------
    >>> X = np.array([[1.0], [2.0]]); y = np.array([3.0, 5.5])
    >>> exact_residuals(X, y, {(0,): Fraction(1), (1,): Fraction(2)})
    array([0. , 0.5])
    """
    Xa = np.asarray(X, dtype=np.float64)
    if Xa.ndim == 1:
        Xa = Xa[:, None]
    top = max((max(t) for t in monomials), default=0)
    out = np.empty(Xa.shape[0])
    for i, row in enumerate(Xa):
        pows = [[Fraction(1)] for _ in row]
        for j, v in enumerate(row):
            fv = Fraction(float(v))
            for _ in range(top):
                pows[j].append(pows[j][-1] * fv)
        total = Fraction(float(y[i]))
        for t, a in monomials.items():
            if a:
                term = a
                for j, e in enumerate(t):
                    if e:
                        term *= pows[j][e]
                total -= term
        out[i] = float(total)
    return out
