"""Tests for complexity.engine.full_fit: what a sweep hands out from its fit on all the data.

Coefficients in the user's units are held to NIST StRD through ``cx.sweep(...).coefficients(c)``
itself, the route users get (certified values: tests/data, from NIST's multiple-precision
computation; the digits required: the table "Digits a careful float64 implementation reaches" in
the project's NIST reference notes, tests/data/README.md). The engel data set that statsmodels
ships (235 households, 231 distinct incomes) is the modest data set for very high degrees.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import statsmodels.api as sm
from _nist import digits, load, lre

import complexity as cx
from complexity.lstsq.coefficients import fit_linear, fit_polynomial

# (coefficients, standard errors) digits, from the NIST reference notes' table (see above)
NIST_DIGITS = {
    "Norris": (12, 13),
    "Pontius": (12, 13),
    "Filip": (12, 13),
    "Longley": (12, 13),
    "Wampler1": (9, 13),
    "Wampler2": (12, 13),
    "Wampler3": (9, 13),
    "Wampler4": (9, 13),
    "Wampler5": (7, 13),
}
# Wampler1 fits exactly: certified SDs are 0, compared with an absolute error (NIST notes).
WAMPLER1_ABS = 1e-8
# NoInt1 and NoInt2 are models through the origin: no ladder fits those (every ladder has an
# intercept), so they are held through fit_linear in tests/test_lstsq.py only.


def _swept(name: str):
    """The certified model as the top rung of a ladder, swept; its coefficient table."""
    case = load(name)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        if case.polynomial_degree is not None:
            d = case.polynomial_degree
            ladder = cx.PolynomialLadder(range(0, d + 1))
            result = cx.sweep(ladder, case.X, case.y, plan=cx.CrossValidation(5), random_state=0)
            return case, result.coefficients(d)
        ladder = cx.FeatureLadder(range(0, case.X.shape[1] + 1))
        result = cx.sweep(ladder, case.X, case.y, plan=cx.CrossValidation(4), random_state=0)
        return case, result.coefficients(case.X.shape[1])


@pytest.mark.parametrize("name", sorted(NIST_DIGITS))
def test_sweep_coefficients_reach_the_nist_digits(name: str) -> None:
    case, table = _swept(name)
    coef_need, sd_need = NIST_DIGITS[name]
    assert digits(lre(table["estimate"].to_numpy(), case.coef)) >= coef_need
    if name == "Wampler1":
        assert np.max(np.abs(table["std_error"].to_numpy() - case.coef_sd)) <= WAMPLER1_ABS
    else:
        assert digits(lre(table["std_error"].to_numpy(), case.coef_sd)) >= sd_need


@pytest.mark.parametrize("name", ["Norris", "Pontius", "Wampler4", "Longley"])
def test_sweep_and_one_off_fit_are_one_route(name: str) -> None:
    # the same design, the same conversion: the table equals the one-off fit to the last bit
    case, table = _swept(name)
    if case.polynomial_degree is not None:
        got = fit_polynomial(case.X[:, 0], case.y, degree=case.polynomial_degree)
    else:
        got = fit_linear(case.X, case.y)
    np.testing.assert_array_equal(table["estimate"].to_numpy(), got.coef)
    np.testing.assert_array_equal(table["std_error"].to_numpy(), got.coef_sd)


def _engel():
    data = sm.datasets.engel.load_pandas().data
    return data[["income"]], data["foodexp"]


def test_degrees_beyond_the_data_name_the_bound_in_plain_words() -> None:
    # 231 distinct incomes determine a polynomial of degree 230 at most (231 coefficients)
    X, y = _engel()
    with pytest.raises(ValueError) as err:
        cx.sweep(cx.PolynomialLadder([500]), X, y, random_state=0)
    text = str(err.value)
    assert "needs 501 coefficients" in text
    assert "Degrees up to 230 can be fitted to 235 rows with 231 distinct x values." in text
    assert "range(" not in text and "degrees=" not in text  # usable from the command line too


def test_hopeless_degree_fails_with_the_training_set_shortfall() -> None:
    # degree 230 needs all 231 distinct incomes; a bootstrap sample holds about 63% of them
    X, y = _engel()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        with pytest.raises(
            cx.SweepFailedError, match=r"distinct x value\(s\); degree 230 needs 231"
        ):
            cx.sweep(cx.PolynomialLadder([230]), X, y, plan=cx.Bootstrap(20), random_state=0)


def test_very_high_degrees_sweep_and_say_why_no_power_basis_is_given() -> None:
    X, y = _engel()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        result = cx.sweep(
            cx.PolynomialLadder(range(0, 231)), X, y, plan=cx.Bootstrap(10), random_state=0
        )
    assert not result.coefficient_tables._made  # nothing converted until asked for
    assert result.curves.loc[:5, "test_mse"].notna().all()
    # degrees no bootstrap sample supports are failures with the ladder's reason
    assert "needs" in result.failures.loc[230, "first_message"]
    # a low degree: the table equals statsmodels OLS on the raw powers (well conditioned)
    income = X["income"].to_numpy()
    ref = sm.OLS(y.to_numpy(), np.vander(income, 3, increasing=True)).fit()
    np.testing.assert_allclose(result.coefficients(2)["estimate"], ref.params, rtol=1e-7)
    # a degree whose power basis cannot be used in float64: the reason, not minutes of work
    for degree in (60, 230):
        with pytest.raises(ValueError, match=f"degree {degree}: .*no digit would be left"):
            result.coefficients(degree)
