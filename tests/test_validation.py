"""Tests for complexity._validation: messages name the argument, the value and what is accepted."""

import numpy as np
import pandas as pd
import pytest

from complexity._validation import as_seed_sequence, check_float, check_int, check_option, check_X_y


def test_check_int_float_option_messages():
    with pytest.raises(TypeError, match="n must be an int; got 2.0 of type float"):
        check_int("n", 2.0)
    with pytest.raises(TypeError, match="n must be an int; got True"):
        check_int("n", True)
    with pytest.raises(ValueError, match="n must be an int >= 2; got 1"):
        check_int("n", 1, minimum=2)
    with pytest.raises(ValueError, match="s must be finite; got nan"):
        check_float("s", float("nan"))
    with pytest.raises(ValueError, match="s must be >= 0.0; got -1.0"):
        check_float("s", -1.0, minimum=0.0)
    with pytest.raises(ValueError, match="rule must be one of 'a', 'b'; got 'c'"):
        check_option("rule", "c", ("a", "b"))


def test_seed_sequence_resolution():
    assert as_seed_sequence(3).entropy == 3
    ss = np.random.SeedSequence(9)
    assert as_seed_sequence(ss) is ss
    g = np.random.default_rng(0)
    a, b = as_seed_sequence(g), as_seed_sequence(g)
    assert a.entropy != b.entropy  # a generator advances (scikit-learn convention)
    assert as_seed_sequence(np.random.default_rng(0)).entropy == a.entropy
    with pytest.raises(TypeError, match="random_state must be"):
        as_seed_sequence("seed")


def test_check_X_y_copies_and_keeps_names():
    X = pd.DataFrame({"a": [1, 2, 3], "b": [4.0, 5.0, 6.0]})
    y = pd.Series([1.0, 2.0, 3.0])
    data = check_X_y(X, y)
    assert data.feature_names == ("a", "b")
    data.X[0, 0] = 99
    assert X.iloc[0, 0] == 1
    with pytest.raises(TypeError, match="boolean"):
        check_X_y(np.array([True, False, True]), y)
    with pytest.raises(ValueError, match=r"groups must be 1-D with one label per row of X \(3\)"):
        check_X_y(X, y, groups=[1, 2])
    with pytest.raises(ValueError, match="y must be 1-D"):
        check_X_y(X, np.ones((3, 2)))
