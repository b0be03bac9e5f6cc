"""complexity._csv_input: reading the command line's CSV file (unit level; end to end in test_cli)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from complexity._csv_input import (
    index_like_first_column,
    read_table,
    select_data,
    separator_char,
)
from complexity.exceptions import InputError


def _frame_round_trip(frame: pd.DataFrame, tmp_path, **to_csv) -> pd.DataFrame:
    path = tmp_path / "f.csv"
    frame.to_csv(path, **to_csv)
    return read_table(path, to_csv.get("sep", ","), to_csv.get("decimal", "."))


@pytest.mark.parametrize(
    ("index", "reason"),
    [
        (pd.RangeIndex(6), "row numbers 0..5"),
        (pd.RangeIndex(1, 7), "row numbers 1..6"),
        (pd.Index([3, 8, 9, 12, 40, 41]), "a different label on every row"),
        (pd.Index(list("abcdef")), "a different label on every row"),
    ],
)
def test_index_written_by_pandas_is_found(index, reason, tmp_path):
    # pandas' DataFrame.to_csv writes the index first under an empty header cell by default
    frame = pd.DataFrame({"x": np.linspace(0, 1, 6), "y": np.arange(6.0) ** 2}, index=index)
    read = _frame_round_trip(frame, tmp_path)
    assert read.columns[0] == "Unnamed: 0"
    name, why = index_like_first_column(read)
    assert name == "Unnamed: 0" and reason in why


@pytest.mark.parametrize(
    "first",
    [
        {"day": np.arange(6)},  # a header: the file says it is a column
        {"Unnamed: 0": [0, 1, 1, 2, 3, 4]},  # repeated labels
        {"Unnamed: 0": [0.1, 0.7, 0.2, 0.9, 0.4, 0.3]},  # fractional numbers: a measurement
        {"Unnamed: 0": [0, 1, None, 3, 4, 5]},  # an empty cell
    ],
)
def test_columns_that_are_not_an_index(first, tmp_path):
    frame = pd.DataFrame({**first, "y": np.arange(6.0)})
    assert index_like_first_column(frame) is None


def test_select_data_leaves_the_index_out_only_by_default(tmp_path):
    frame = pd.DataFrame({"a": [1.0, 3, 2, 5, 4, 6], "y": [2.0, 1, 4, 3, 6, 5]})
    read = _frame_round_trip(frame, tmp_path)
    path = tmp_path / "f.csv"
    left = select_data(read, path, "y", None, False)
    assert list(left.X.columns) == ["a"] and "left out the first column" in left.notes[0]
    kept = select_data(read, path, "y", None, False, keep_index=True)
    assert list(kept.X.columns) == ["Unnamed: 0", "a"] and "kept" in kept.notes[0]
    asked = select_data(read, path, "y", ["a"], False)
    assert list(asked.X.columns) == ["a"] and asked.notes == []
    np.testing.assert_array_equal(left.X["a"], frame["a"])


def test_decimal_comma_file_reads_the_same_doubles(tmp_path):
    frame = pd.DataFrame({"x": [0.1, 2.5, -3.75, 1e-3, 12.0, 7.125], "y": np.arange(6.0)})
    read = _frame_round_trip(frame, tmp_path, sep=";", decimal=",", index=False)
    chosen = select_data(read, tmp_path / "f.csv", "y", None, False, decimal=",")
    np.testing.assert_array_equal(chosen.X["x"], frame["x"])


def test_decimal_point_cells_are_refused_under_decimal_comma(tmp_path):
    # "1.250" in a decimal-comma file may be 1250 with a thousands dot; it is never read as 1.25
    path = tmp_path / "f.csv"
    path.write_text("x;y\n1,5;1\n1.250;2\n3;3\n4;4\n5;5\n6;6\n", encoding="utf-8")
    read = read_table(path, ";", ",")
    with pytest.raises(InputError, match=r"data row 2 holds '1\.250' \(a decimal point"):
        select_data(read, path, "y", None, False, decimal=",")


def test_separator_spellings():
    assert separator_char("\\t") == "\t"
    assert separator_char("tab") == "\t"
    assert separator_char("\t") == "\t"
    assert separator_char(";") == ";"
