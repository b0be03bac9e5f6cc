"""The raw power design's condition number shown beside the stable basis in the conditioning view.

Checked against a published value (the scaled condition number of the Longley data) and against
exact rational arithmetic on NIST's Filip data, where the raw power design is famously close to
singular.
"""

from __future__ import annotations

from fractions import Fraction

import _nist
import numpy as np
import pytest

from complexity._figures_conditioning import _raw_power_condition, _reliable_limit


def _unit_column_condition(V: np.ndarray) -> float:
    s = np.linalg.svd(V / np.linalg.norm(V, axis=0), compute_uv=False)
    return float(s[0] / s[-1])


def test_unit_length_scaling_is_the_published_scaling_of_the_longley_design():
    # Belsley, Kuh & Welsch, Regression Diagnostics (1980): the Longley design with its constant,
    # columns scaled to unit length, has a largest condition index of 43,275 (from memory). Our
    # raw-power routine uses this scaling; on a one-column "polynomial" it must reproduce it.
    case = _nist.load("Longley")  # NIST StRD Longley.dat, tests/data/
    V = np.column_stack([np.ones(len(case.y)), case.X])
    assert _unit_column_condition(V) == pytest.approx(43275, rel=2e-5)


def _count_below(G: list[list[Fraction]], lam: Fraction) -> int:
    """Eigenvalues of D G D (D = diag(G_ii)^-1/2) below ``lam``: negative pivots of the
    congruent matrix G - lam diag(G), by Sylvester's law of inertia, in exact arithmetic."""
    p = len(G)
    A = [[G[i][j] - (lam * G[i][i] if i == j else 0) for j in range(p)] for i in range(p)]
    negative = 0
    for k in range(p):
        pivot = A[k][k]
        if pivot == 0:  # a pivot exactly zero: nudge lambda (does not happen for these data)
            return _count_below(G, lam * (1 + Fraction(1, 10**30)))
        negative += pivot < 0
        for i in range(k + 1, p):
            f = A[i][k] / pivot
            if f:
                for j in range(k + 1, p):
                    A[i][j] -= f * A[k][j]
    return negative


def _exact_condition(x: np.ndarray, degree: int) -> float:
    """Condition number of the unit-column-scaled raw power design, from exact rationals."""
    xs = [Fraction(float(v)) for v in x]  # every float is an exact dyadic rational
    moments = [sum(v**k for v in xs) for k in range(2 * degree + 1)]
    G = [[moments[i + j] for j in range(degree + 1)] for i in range(degree + 1)]
    p = degree + 1

    def bisect(lo: Fraction, hi: Fraction, target: int) -> Fraction:
        # the smallest lambda with more than `target` eigenvalues below it, to 1e-9 relative
        while hi - lo > hi * Fraction(1, 10**9):
            mid = (lo + hi) / 2
            if _count_below(G, mid) > target:
                hi = mid
            else:
                lo = mid
        return hi

    hi = Fraction(1)  # eigenvalues average 1 (unit diagonal), so the smallest is below 1
    lo = hi / 2
    while _count_below(G, lo) > 0:
        hi, lo = lo, lo / 2
    smallest = bisect(lo, hi, 0)
    largest = bisect(Fraction(1), Fraction(p + 1), p - 1)  # trace p bounds the largest
    return float((largest / smallest) ** 0.5) if smallest else float("inf")


@pytest.mark.slow
def test_raw_power_condition_matches_exact_arithmetic_on_filip():
    # NIST StRD Filip.dat (tests/data/): x from -8.78 to -3.13, far from zero, so raw powers are
    # badly conditioned; exact rational arithmetic gives the true condition numbers
    x = _nist.load("Filip").X
    degrees = [1, 3, 5, 7]
    values, limits = _raw_power_condition(x, degrees)
    for d, value, limit in zip(degrees, values, limits):
        exact = _exact_condition(x[:, 0], d)
        if exact < limit / 10:
            assert value == pytest.approx(exact, rel=1e-6), d
    assert np.all(np.diff(values[np.isfinite(values)]) > 0)  # grows with the degree


def test_raw_power_condition_marks_what_double_precision_cannot_resolve():
    # x a million units from zero (the case the stable basis exists for): exact arithmetic puts
    # the unit-scaled raw design at about 6.7e6, 5.3e13 and 4.3e20 for degrees 1, 2, 3. The first
    # two are resolved (the second near the limit, to within the stated 10%); the third is past
    # what double precision can resolve, so the routine says so (inf) instead of a rounding artefact
    x = (1e6 + np.linspace(0.0, 1.0, 30))[:, None]
    values, limits = _raw_power_condition(x, [1, 2, 3])
    for d in (1, 2):
        exact = _exact_condition(x[:, 0], d)
        assert exact < limits[d - 1]
        assert values[d - 1] == pytest.approx(exact, rel=0.1 if d == 2 else 1e-6)
    exact3 = _exact_condition(x[:, 0], 3)
    assert exact3 > limits[2] and values[2] == np.inf
    assert limits[2] == pytest.approx(1 / (10 * 4 * np.finfo(float).eps))
    assert _reliable_limit(11) < _reliable_limit(3)


def test_raw_power_condition_does_not_depend_on_the_units_of_x():
    # column scaling removes any unit: x in degrees C and in millidegrees give the same numbers
    rng = np.random.default_rng(0)
    x = rng.uniform(-20, 60, size=(40, 1))
    a, _ = _raw_power_condition(x, [0, 2, 4, 6])
    b, _ = _raw_power_condition(x * 1000.0, [0, 2, 4, 6])
    np.testing.assert_allclose(a, b, rtol=1e-9)
    assert a[0] == 1.0


def test_raw_power_condition_for_two_predictors_uses_every_monomial():
    # total degree 2 in two predictors: 1, a, b, a², ab, b² (six columns, graded order)
    rng = np.random.default_rng(1)
    X = rng.uniform(1.0, 3.0, size=(30, 2))
    a, b = X[:, 0], X[:, 1]
    V = np.column_stack([np.ones(30), a, b, a**2, a * b, b**2])
    values, _ = _raw_power_condition(X, [2])
    assert values[0] == pytest.approx(_unit_column_condition(V), rel=1e-9)
