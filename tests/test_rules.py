"""Tests for complexity.rules: selection rules and stability."""

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from complexity.rules import choose, choose_min, choose_one_se, rule_table, stability

curves_values = st.lists(st.floats(0.01, 100.0), min_size=1, max_size=12)


def test_one_se_worked_check():
    # METHODS.md §4 worked check (one-SE rule of Breiman et al. 1984): CV = (5.0, 3.0, 2.5, 2.6, 2.7),
    # SE(k* = 2) = 0.6 -> threshold 3.1 -> choose k = 1.
    assert choose_one_se([5.0, 3.0, 2.5, 2.6, 2.7], [9.0, 9.0, 0.6, 9.0, 9.0]) == 1


def test_min_prefers_simplest_on_ties():
    # common practice: ties go to the simpler capacity (METHODS.md §8, "break ties ... preferring the simpler k")
    assert choose_min([3.0, 1.0, 1.0, 2.0]) == 1


def test_min_skips_nan_and_all_nan_raises():
    assert choose_min([np.nan, 2.0, 1.0]) == 2
    with pytest.raises(ValueError, match="no capacity has a finite error"):
        choose_min([np.nan, np.nan])


@settings(max_examples=200, deadline=None)
@given(
    st.lists(st.integers(0, 800), min_size=1, max_size=12),
    st.lists(st.integers(0, 40), min_size=12, max_size=12),
    st.integers(-400, 400),
)
def test_shift_invariance(eighths, se_eighths, shift):
    # law (STYLE.md, selection rules): adding a constant to a curve never changes the choice.
    # Values are multiples of 1/8 so that the shifted sums are exact in binary floating point.
    e = np.array(eighths) / 8.0
    se = np.array(se_eighths[: len(e)]) / 8.0
    assert choose_min(e + shift) == choose_min(e)
    assert choose_one_se(e + shift, se) == choose_one_se(e, se)


@settings(max_examples=200, deadline=None)
@given(curves_values, st.lists(st.floats(0.0, 10.0), min_size=12, max_size=12))
def test_one_se_never_more_complex_than_min(errors, ses):
    # law: the one-standard-error rule never picks a larger capacity than the minimum
    e = np.array(errors)
    se = np.array(ses[: len(e)])
    pos = choose_one_se(e, se)
    best = choose_min(e)
    assert pos <= best
    assert e[pos] <= e[best] + se[best] + 1e-12


def _curves():
    return pd.DataFrame(
        {
            "test_mse": [5.0, 3.0, 2.5, 2.6, 2.7],
            "test_mse_se": [0.5, 0.5, 0.6, 0.5, 0.5],
            "aic": [10.0, 8.0, 9.0, 7.0, 7.5],
        },
        index=pd.Index([0, 1, 2, 3, 4], name="degree"),
    )


def test_rule_table_reasons_and_criteria():
    table = rule_table(_curves())
    assert list(table.index) == ["min", "one-se", "aic"]
    assert table.loc["min", "capacity"] == 2
    assert table.loc["one-se", "capacity"] == 1
    assert table.loc["aic", "capacity"] == 3
    assert "within" not in table.loc["min", "reason"]
    assert "plus one standard error" in table.loc["one-se", "reason"]
    assert "AIC" in table.loc["aic", "reason"]


def test_choose_unknown_or_missing_rule():
    with pytest.raises(ValueError, match="rule must be one of"):
        choose("smallest", _curves())
    with pytest.raises(ValueError, match="closed-form criteria"):
        choose("bic", _curves())


def test_stability_shares():
    # METHODS.md §8: pi_k = #{b : k_b = k} / B
    err = np.array([[3.0, 1.0, 2.0], [3.0, 2.0, 1.0], [1.0, 2.0, 3.0], [3.0, 1.0, 1.5]])
    se = np.zeros_like(err)
    s = stability(err, se, (0, 1, 2), "min")
    assert s.tolist() == [0.25, 0.5, 0.25]
    assert s.sum() == pytest.approx(1.0)
    s1 = stability(err, np.full_like(err, 1.0), (0, 1, 2), "one-se")
    assert s1.tolist() == [0.25, 0.75, 0.0]


@settings(max_examples=100, deadline=None)
@given(
    st.integers(1, 8),
    st.integers(1, 6),
    st.integers(0, 2**32 - 1),
    st.sampled_from(["min", "one-se"]),
)
def test_stability_equals_rule_applied_row_by_row(n_rows, n_caps, seed, rule):
    # law: stability counts, per replicate, the capacity the rule itself would choose
    rng = np.random.default_rng(seed)
    err = np.round(rng.uniform(0, 3, (n_rows, n_caps)), 1)  # rounding makes ties likely
    se = rng.uniform(0, 0.5, (n_rows, n_caps))
    err[rng.random((n_rows, n_caps)) < 0.1] = np.nan
    caps = tuple(range(n_caps))
    expected = np.zeros(n_caps)
    used = 0
    for e, s in zip(err, se):
        if np.isfinite(e).any():
            expected[choose_one_se(e, s) if rule == "one-se" else choose_min(e)] += 1
            used += 1
    got = stability(err, se, caps, rule).to_numpy()
    if used:
        np.testing.assert_array_equal(got, expected / used)
    else:
        assert np.isnan(got).all()
