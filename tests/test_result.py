"""Tests for complexity.result: summary, HTML, and the exact JSON round trip."""

import json

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_diabetes
from sklearn.tree import DecisionTreeRegressor

import complexity as cx
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
    assert CAUTION in text
    assert "one-se" in text and "min" in text
    html = result._repr_html_()
    assert html.startswith("<div>") and "Recommended degree" in html
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
