"""Tests for complexity.result: summary, HTML, and the exact JSON round trip."""

import dataclasses
import json
from collections.abc import Mapping

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_diabetes
from sklearn.tree import DecisionTreeRegressor

import complexity as cx
from complexity._text import caution_text
from complexity.result import CAUTION

pytestmark = pytest.mark.filterwarnings("ignore::complexity.CapacityWarning")


@pytest.fixture(scope="module")
def result():
    data = load_diabetes()  # open data set shipped with scikit-learn
    return cx.sweep(
        cx.PolynomialLadder(range(0, 4)),
        data.data[:120, [2]],
        data.target[:120],
        plan=cx.Bootstrap(15),
        random_state=4,
    )


def _assert_same(a, b):
    pd.testing.assert_frame_equal(a.curves, b.curves, check_exact=True)
    pd.testing.assert_frame_equal(a.rules, b.rules, check_exact=True)
    np.testing.assert_array_equal(a.stability.to_numpy(), b.stability.to_numpy())
    assert a.recommended == b.recommended and a.rule == b.rule
    assert a.noise == b.noise
    assert a.notes == b.notes
    pd.testing.assert_frame_equal(a.failures, b.failures, check_exact=True, check_index_type=False)


def test_save_load_exact_round_trip(result, tmp_path):
    path = result.save(tmp_path / "r.json")
    back = cx.load_result(path)
    _assert_same(result, back)
    assert back.metadata["seed_entropy"] == result.metadata["seed_entropy"]
    # the file is plain JSON (an open format), with no NaN tokens
    doc = json.loads(path.read_text())
    assert doc["format"] == "complexity.sweep-result"
    assert "NaN" not in path.read_text().replace('"NaN"', "")
    # saving the reloaded result gives the same bytes
    assert back.save(tmp_path / "again.json").read_text() == path.read_text()


def test_round_trip_with_failures_none_capacities_and_nan(tmp_path):
    data = load_diabetes()
    ladder = cx.ParamLadder(DecisionTreeRegressor(), "max_depth", [1, 3, None])
    r = cx.sweep(
        ladder, data.data[:60, :3], data.target[:60], plan=cx.CrossValidation(3), random_state=0
    )
    assert r.curves["variance"].isna().all()  # one prediction per point: documented NaN with a note
    back = cx.load_result(r.save(tmp_path / "p.json"))
    _assert_same(r, back)
    assert list(back.curves.index) == [1, 3, None]


def test_load_refuses_other_files(tmp_path):
    bad = tmp_path / "x.json"
    bad.write_text(json.dumps({"format": "something-else"}))
    with pytest.raises(ValueError, match="is not a saved sweep result"):
        cx.load_result(bad)


def test_summary_and_html(result):
    text = result.summary()
    assert f"Recommended degree: {result.recommended}" in text
    # a polynomial ladder: the caution speaks of polynomials and calibration, once
    assert caution_text("polynomial") in text and text.count("Caution:") == 1
    assert "polynomial" in caution_text("polynomial") and CAUTION != caution_text("polynomial")
    assert "one-se" in text and "min" in text
    html = result._repr_html_()
    assert html.startswith("<div>") and "Recommended degree" in html
    # the wide curves table scrolls inside its box instead of running past the page
    assert '<div style="overflow-x:auto;max-width:100%"><table' in html
    assert "SweepResult" in repr(result)


def test_summary_lists_predictor_inclusion_for_ranked_feature_ladders():
    data = load_diabetes(as_frame=True)  # open data set shipped with scikit-learn
    r = cx.sweep(
        cx.FeatureLadder(range(1, 5), order="correlation"),
        data.data.iloc[:150],
        data.target.iloc[:150],
        plan=cx.CrossValidation(3),
        random_state=0,
    )
    line = next(ln for ln in r.summary().splitlines() if ln.startswith("Predictors among"))
    shares = r.inclusion.loc[r.recommended]
    top = shares.idxmax()
    assert f"{top} {shares[top]:.2f}" in line
    assert f"the first {r.recommended} " in line


def test_coefficient_tables_survive_save_and_load_bit_for_bit(result, tmp_path):
    # issue 12 item 2: after load_result, coefficients(c) gives exactly what the sweep gave
    back = cx.load_result(result.save(tmp_path / "c.json"))
    assert list(back.coefficient_tables) == list(result.coefficient_tables)
    for capacity in result.curves.index:
        a, b = result.coefficients(capacity), back.coefficients(capacity)
        pd.testing.assert_frame_equal(a, b, check_exact=True)
        assert a.to_numpy().tobytes() == b.to_numpy().tobytes()  # the bits, signed zeros too
        assert a.attrs == b.attrs
    # the reference value behind the table: numpy's own least-squares polynomial (common practice)
    x, y = load_diabetes().data[:120, 2], load_diabetes().target[:120]
    np.testing.assert_allclose(
        back.coefficients(2)["estimate"].to_numpy(),
        np.polynomial.polynomial.polyfit(x, y, 2),
        rtol=1e-9,
    )
    with pytest.raises(ValueError, match="capacity must be one of"):
        back.coefficients(7)


def test_a_result_without_coefficient_tables_says_so_after_loading(tmp_path):
    # a ladder off the exact engine has no tables; a saved and reloaded result says the same
    data = load_diabetes()
    r = cx.sweep(
        cx.ParamLadder(DecisionTreeRegressor(), "max_depth", [1, 2]),
        data.data[:60, :2],
        data.target[:60],
        plan=cx.CrossValidation(3),
        random_state=0,
    )
    back = cx.load_result(r.save(tmp_path / "t.json"))
    for res in (r, back):
        with pytest.raises(ValueError, match="has no coefficient tables"):
            res.coefficients(1)
    assert json.loads((tmp_path / "t.json").read_text())["coefficients"] is None


class _PartlyAvailable(Mapping):
    """Tables that cannot be made beyond a degree, as lazily computed tables may say."""

    def __init__(self, tables, limit):
        self._tables, self._limit = tables, limit

    def __getitem__(self, capacity):
        if capacity > self._limit:
            raise ValueError(f"coefficient tables are not available beyond degree {self._limit}")
        return self._tables[capacity]

    def __iter__(self):
        return iter(self._tables)

    def __len__(self):
        return len(self._tables)


def test_a_table_that_could_not_be_made_is_saved_as_its_reason(result, tmp_path):
    tables = {c: result.coefficients(c) for c in result.curves.index}
    partly = dataclasses.replace(result, coefficient_tables=_PartlyAvailable(tables, 1))
    back = cx.load_result(partly.save(tmp_path / "g.json"))
    pd.testing.assert_frame_equal(back.coefficients(1), result.coefficients(1), check_exact=True)
    for capacity in (2, 3):
        with pytest.raises(ValueError, match="not available beyond degree 1"):
            back.coefficients(capacity)
    assert list(back.coefficient_tables) == [0, 1, 2, 3]


def test_a_file_saved_before_tables_were_kept_says_why_they_are_missing(result, tmp_path):
    path = result.save(tmp_path / "old.json")
    doc = json.loads(path.read_text())
    del doc["coefficients"]  # the layout of files written before this key existed
    path.write_text(json.dumps(doc))
    with pytest.raises(ValueError, match="saved without its coefficient tables"):
        cx.load_result(path).coefficients(1)
