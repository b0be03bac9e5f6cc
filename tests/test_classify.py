"""Capacity sweeps under other losses (complexity._classify.classification_sweep).

Reference: scikit-learn's ``cross_val_score`` on the same folds (data sets scikit-learn ships:
iris, breast cancer, diabetes, digits); Domingos (2000) for the zero-one split identities.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer, load_diabetes, load_digits, load_iris
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import balanced_accuracy_score, make_scorer
from sklearn.model_selection import PredefinedSplit, StratifiedKFold, cross_val_score
from sklearn.neighbors import KNeighborsClassifier, KNeighborsRegressor
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler
from sklearn.tree import DecisionTreeClassifier
from threadpoolctl import threadpool_limits

import complexity as cx
from complexity._classify import classification_sweep


@pytest.fixture(autouse=True)
def _one_thread():
    with threadpool_limits(1):
        yield


def _folds(plan, X, y=None, seed=0):
    return list(cx.plans.as_plan(plan).split(X, y, random_state=seed))


def _against_cross_val_score(ladder, X, y, plan, loss, scoring, factor=1.0):
    """Each fold's loss of the sweep against cross_val_score on the same folds."""
    out = classification_sweep(ladder, X, y, plan=plan, loss=loss, random_state=0)
    folds = _folds(plan, X, y)
    for cap, model in zip(ladder.capacities, ladder.build(np.asarray(X, dtype=float))):
        ref = cross_val_score(model, X, y, cv=folds, scoring=scoring)
        ours = out.resample_loss[cap].to_numpy()
        np.testing.assert_allclose(ours * factor, -ref, rtol=0, atol=1e-12)
    return out


def test_accuracy_matches_cross_val_score_iris():
    # 1 - accuracy per fold (zero-one loss) and minus accuracy (the scorer itself).
    X, y = load_iris(return_X_y=True)
    ladder = cx.ParamLadder(KNeighborsClassifier(), "n_neighbors", [30, 10, 3], simpler="high")
    plan = cx.CrossValidation(5)
    out = classification_sweep(ladder, X, y, plan=plan, loss="zero-one", random_state=0)
    folds = _folds(plan, X)
    for cap in ladder.capacities:
        ref = cross_val_score(KNeighborsClassifier(n_neighbors=cap), X, y, cv=folds)
        np.testing.assert_allclose(out.resample_loss[cap], 1 - ref, rtol=0, atol=1e-12)
        # equal fold sizes (150 / 5): the pooled test loss is the mean over folds
        assert out.curves.loc[cap, "test_loss"] == pytest.approx(1 - ref.mean(), abs=1e-12)
    _against_cross_val_score(ladder, X, y, plan, "accuracy", "accuracy")  # loss = -accuracy
    balanced = make_scorer(balanced_accuracy_score)  # a scorer callable
    _against_cross_val_score(ladder, X, y, plan, balanced, balanced)


def test_log_loss_matches_cross_val_score_iris():
    X, y = load_iris(return_X_y=True)
    model = make_pipeline(StandardScaler(), LogisticRegression())
    ladder = cx.ParamLadder(model, "logisticregression__C", [0.01, 1.0, 100.0])
    plan = StratifiedKFold(5, shuffle=True, random_state=1)  # every class in every test fold
    out = _against_cross_val_score(ladder, X, y, plan, "log-loss", "neg_log_loss")
    assert "not defined" in out.split and any("not defined" in n for n in out.notes)
    _against_cross_val_score(ladder, X, y, plan, "neg_log_loss", "neg_log_loss")


def test_brier_matches_cross_val_score_breast_cancer_binary():
    # scikit-learn's binary Brier score scores the positive class only: half our two-class sum.
    X, y = load_breast_cancer(return_X_y=True)
    model = make_pipeline(StandardScaler(), LogisticRegression())
    ladder = cx.ParamLadder(model, "logisticregression__C", [0.001, 1.0])
    plan = cx.CrossValidation(4, n_repeats=2)
    out = _against_cross_val_score(ladder, X, y, plan, "brier", "neg_brier_score", factor=0.5)
    # on data the Brier split adds up to the test error
    total = out.curves["bias_sq_plus_noise"] + out.curves["variance"]
    np.testing.assert_allclose(total, out.curves["test_loss"], rtol=1e-12)


def test_brier_multiclass_matches_cross_val_score_digits_subsample():
    # scikit-learn >= 1.7 sums the multi-class Brier score over classes, as we do.
    X, y = load_digits(return_X_y=True)
    X, y = X[:300], y[:300]
    ladder = cx.ParamLadder(KNeighborsClassifier(), "n_neighbors", [15, 3], simpler="high")
    plan = StratifiedKFold(3, shuffle=True, random_state=0)
    _against_cross_val_score(ladder, X, y, plan, "brier", "neg_brier_score")


def test_absolute_error_matches_cross_val_score_diabetes():
    X, y = load_diabetes(return_X_y=True)
    ladder = cx.ParamLadder(KNeighborsRegressor(), "n_neighbors", [40, 5], simpler="high")
    out = _against_cross_val_score(
        ladder, X, y, cx.CrossValidation(5), "absolute-error", "neg_mean_absolute_error"
    )
    assert out.classes is None and out.recommended in (40, 5)


def test_string_labels_give_the_same_curves_as_codes():
    X, y = load_iris(return_X_y=True)
    names = np.array(["setosa", "versicolor", "virginica"], dtype=object)[y]
    ladder = cx.ParamLadder(DecisionTreeClassifier(), "max_depth", [1, 2, 4])
    kw = dict(plan=cx.Bootstrap(12), random_state=4)
    a = classification_sweep(ladder, X, y, **kw)
    b = classification_sweep(ladder, X, names, **kw)
    assert b.classes.tolist() == ["setosa", "versicolor", "virginica"]
    pd.testing.assert_frame_equal(a.curves, b.curves)
    c = classification_sweep(ladder, X, pd.Series(names), loss="brier", **kw)
    assert np.isfinite(c.curves["variance"]).all()


def test_missing_class_in_a_training_set_does_not_shift_columns():
    # fold 0 holds every "cedar" row, so the model trained for it never sees "cedar"
    rng = np.random.default_rng(0)
    X = rng.normal(size=(60, 2))
    y = np.array(["ash"] * 25 + ["birch"] * 25 + ["cedar"] * 10, dtype=object)
    X[y == "birch"] += 1.5
    test_fold = np.r_[np.arange(50) % 2 + 1, np.zeros(10, dtype=int)]
    test_fold[:6] = 0  # some ash rows in fold 0 too
    plan = PredefinedSplit(test_fold)
    ladder = cx.ParamLadder(LogisticRegression(), "C", [1.0])
    out = classification_sweep(ladder, X, y, plan=plan, loss="brier", random_state=0)
    # independent reference: Brier from a label -> probability lookup, 0 for unseen classes
    for k, (tr, te) in enumerate(plan.split(X)):
        est = LogisticRegression(C=1.0).fit(X[tr], y[tr])
        proba = est.predict_proba(X[te])
        ref = []
        for row, label in zip(proba, y[te]):
            p = dict(zip(est.classes_, row))
            ref.append(sum((p.get(c, 0.0) - (label == c)) ** 2 for c in ("ash", "birch", "cedar")))
        assert out.resample_loss.iloc[k, 0] == pytest.approx(np.mean(ref), abs=1e-12)
    # the cedar rows of fold 0 are scored with p(cedar) = 0: loss 1 + sum of the others' p^2 > 1
    assert out.resample_loss.iloc[0, 0] > 1.0 > out.resample_loss.iloc[1, 0]


def test_results_do_not_depend_on_n_jobs():
    X, y = load_breast_cancer(return_X_y=True)
    X, y = X[::3], y[::3]
    ladder = cx.ParamLadder(DecisionTreeClassifier(max_features=3), "max_depth", [1, 3, None])
    kw = dict(plan=cx.Bootstrap(16), random_state=7)
    a = classification_sweep(ladder, X, y, n_jobs=1, **kw)
    b = classification_sweep(ladder, X, y, n_jobs=2, **kw)
    pd.testing.assert_frame_equal(a.curves, b.curves)
    pd.testing.assert_series_equal(a.stability, b.stability)
    assert a.recommended == b.recommended
    c = classification_sweep(ladder, X, y, n_jobs=1, plan=cx.Bootstrap(16), random_state=8)
    assert not c.curves["test_loss"].equals(a.curves["test_loss"])  # the seed matters


def test_zero_one_split_adds_up_with_deterministic_labels():
    # Known rule, distinct x: labels are noise-free, so the observed label is the optimal class
    # and Domingos (2000) gives test loss = bias + net variance exactly.
    rng = np.random.default_rng(5)
    X = rng.uniform(-1, 1, size=(120, 2))
    y = np.where(X[:, 0] * X[:, 1] > 0, "same", "opposite")
    ladder = cx.ParamLadder(DecisionTreeClassifier(), "max_depth", [1, 2, 3, 6])
    out = classification_sweep(ladder, X, y, plan=cx.Bootstrap(25), random_state=0)
    c = out.curves
    np.testing.assert_allclose(c["bias"] + c["net_variance"], c["test_loss"], atol=1e-12)
    np.testing.assert_allclose(c["net_variance"], c["variance_unbiased"] - c["variance_biased"])
    assert c["noise"].isna().all() and "not estimated" in out.split
    assert c["test_loss"].iloc[0] > c["test_loss"].iloc[2]  # depth 1 cannot cut four quadrants
    assert out.stability.sum() == pytest.approx(1.0)
    assert out.rules.loc["one-se", "capacity"] == out.recommended


def test_zero_one_noise_from_replicated_x():
    # every x appears 4 times; noise(x) = 1 - majority share among its labels (worked from
    # Domingos 2000's N(x) = P(t != y*), plugged in from the replicates)
    rng = np.random.default_rng(2)
    base = rng.uniform(-1, 1, size=(30, 1))
    X = np.repeat(base, 4, axis=0)
    y = (X[:, 0] > 0).astype(int)
    flip = rng.uniform(size=y.size) < 0.2
    y = np.where(flip, 1 - y, y)
    ladder = cx.ParamLadder(KNeighborsClassifier(), "n_neighbors", [20, 4], simpler="high")
    out = classification_sweep(ladder, X, y, plan=cx.CrossValidation(5, 3), random_state=0)
    shares = [
        max(np.mean(y[g * 4 : g * 4 + 4]), 1 - np.mean(y[g * 4 : g * 4 + 4])) for g in range(30)
    ]
    c = out.curves
    np.testing.assert_allclose(c["noise"], 1 - np.mean(shares), atol=1e-12)
    np.testing.assert_allclose(
        c["bias"] + c["net_variance"] + c["noise_term"], c["test_loss"], atol=1e-12
    )


def test_stability_and_standard_error_choice():
    X, y = load_iris(return_X_y=True)
    ladder = cx.ParamLadder(DecisionTreeClassifier(), "max_depth", [1, 2, 3])
    kf = classification_sweep(ladder, X, y, plan=cx.CrossValidation(5, 3), random_state=0)
    assert "fold level" in kf.se_method and len(kf.stability) == 3
    # pass-level SE from the folds of each pass, root-mean-square over passes
    folds = kf.resample_loss[2].to_numpy().reshape(3, 5)
    se = np.sqrt(np.mean(folds.std(axis=1, ddof=1) ** 2 / 5))
    assert kf.curves.loc[2, "test_loss_se"] == pytest.approx(se, abs=1e-12)
    boot = classification_sweep(ladder, X, y, plan=cx.Bootstrap(10), random_state=0)
    assert "point level" in boot.se_method
    one = classification_sweep(ladder, X, y, plan=cx.CrossValidation(5), random_state=0)
    assert one.curves["bias"].isna().all() and any("one training set" in n for n in one.notes)


def test_bad_input_is_refused_with_the_argument_named():
    X, y = load_iris(return_X_y=True)
    tree = cx.ParamLadder(DecisionTreeClassifier(), "max_depth", [1, 2])
    knr = cx.ParamLadder(KNeighborsRegressor(), "n_neighbors", [5])
    with pytest.raises(ValueError, match="loss='zero-one'.*not a classifier"):
        classification_sweep(knr, X, y.astype(float), plan=3)
    with pytest.raises(ValueError, match="absolute-error.*classifier"):
        classification_sweep(tree, X, y, plan=3, loss="absolute-error")
    with pytest.raises(ValueError, match="rule must be"):
        classification_sweep(tree, X, y, plan=3, rule="aic")
    labels = y.astype(object)
    labels[4] = None
    with pytest.raises(ValueError, match="missing label"):
        classification_sweep(tree, X, labels, plan=3)
    with pytest.raises(ValueError, match="single class"):
        classification_sweep(tree, X, np.zeros(150), plan=3)
    with pytest.raises(TypeError, match="Simulation"):
        plan = cx.Simulation(lambda Z: Z[:, 0], 0.1, np.linspace(0, 1, 10))
        classification_sweep(tree, X, y, plan=plan)
    X0, y0 = X.copy(), y.copy()
    classification_sweep(tree, X, y, plan=3, random_state=0)
    assert np.array_equal(X, X0) and np.array_equal(y, y0)


def test_seeding_follows_the_generic_engine_scheme():
    # the scheme of complexity.engine.generic: each random_state left as None, in sorted key
    # order, gets one integers(0, 2**31 - 1) draw from the (resample, capacity) seed below
    # STREAM_ESTIMATOR
    from complexity._classify import _seed_estimator
    from complexity.plans import STREAM_ESTIMATOR, child_seed

    seed = child_seed(np.random.SeedSequence(3), STREAM_ESTIMATOR, 4, 1)
    model = make_pipeline(StandardScaler(), DecisionTreeClassifier(), memory=None)
    got = _seed_estimator(model, seed).get_params()["decisiontreeclassifier__random_state"]
    assert got == int(np.random.default_rng(seed).integers(0, 2**31 - 1, size=1)[0])
    fixed = _seed_estimator(DecisionTreeClassifier(random_state=5), seed)
    assert fixed.random_state == 5  # a random_state the user set is kept
