"""Losses and their published bias-variance splits (complexity.losses).

Sources: Domingos (2000), "A unified bias-variance decomposition and its applications", ICML
2000, title from memory (definitions of main prediction, bias, variance, c2 and net variance; worked by hand below);
Brier (1950) for the multi-class Brier score; the squared-error decomposition per class
(common practice); scikit-learn's metrics for the per-point losses.
"""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import brier_score_loss, get_scorer, log_loss
from sklearn.neighbors import KNeighborsClassifier
from sklearn.tree import DecisionTreeClassifier
from threadpoolctl import threadpool_limits

from complexity import losses as L


@pytest.fixture(autouse=True)
def _one_thread():
    # small fits: BLAS threads only add overhead on a shared machine
    with threadpool_limits(1):
        yield


def test_zero_one_split_hand_computation_three_classes():
    # Domingos (2000) definitions, worked by hand. Classes 0, 1, 2; five training sets.
    #
    # point | predictions  | votes   | y* | main | B | V = P(y!=main) | c2                  | c2*V | P(y!=y*)
    # A     | 0 0 0 1 2    | 3 1 1   | 0  | 0    | 0 | 2/5            | 1                   | 0.4  | 0.4
    # B     | 1 1 1 0 1    | 1 4 0   | 0  | 1    | 1 | 1/5            | -P(y=0|y!=1) = -1   | -0.2 | 0.8
    # C     | 2 2 1 0 2    | 1 1 3   | 1  | 2    | 1 | 2/5            | -P(y=1|y!=2) = -1/2 | -0.2 | 0.8
    # D     | 1 1 1 1 1    | 0 5 0   | 1  | 1    | 0 | 0              | 1                   | 0    | 0
    #
    # means: bias 2/4 = 0.5; variance (0.4+0.2+0.4+0)/4 = 0.25; unbiased variance (0.4+0)/4 = 0.1;
    # biased variance (0.2+0.4)/4 = 0.15; net variance (0.4-0.2-0.2+0)/4 = 0; loss 2.0/4 = 0.5,
    # and loss = bias + net variance = 0.5 + 0 (noise zero: y* is the target).
    # With three classes net variance is not unbiased - biased (0.1 - 0.15): c2 weights it.
    votes = np.array([[3, 1, 1], [1, 4, 0], [1, 1, 3], [0, 5, 0]])
    s = L.zero_one_split(votes, [0, 0, 1, 1])
    assert L.main_prediction(votes).tolist() == [0, 1, 2, 1]
    assert s["bias"] == pytest.approx(0.5, abs=1e-15)
    assert s["variance"] == pytest.approx(0.25, abs=1e-15)
    assert s["variance_unbiased"] == pytest.approx(0.1, abs=1e-15)
    assert s["variance_biased"] == pytest.approx(0.15, abs=1e-15)
    assert s["net_variance"] == pytest.approx(0.0, abs=1e-15)
    assert s["loss"] == pytest.approx(0.5, abs=1e-15)


def test_zero_one_split_hand_computation_two_classes():
    # Two classes, four training sets (Domingos 2000: c2 = -1 on biased points, so net variance
    # = unbiased - biased variance).
    # point | votes | y* | main | B | V   | loss
    # A     | 3 1   | 0  | 0    | 0 | 1/4 | 1/4
    # B     | 1 3   | 0  | 1    | 1 | 1/4 | 3/4
    # C     | 2 2   | 1  | 0    | 1 | 1/2 | 1/2   (tie: the first class is the main prediction)
    # bias 2/3; unbiased variance (1/4)/3; biased variance (1/4+1/2)/3 = 1/4;
    # net = 1/12 - 1/4 = -1/6; loss = (1/4+3/4+1/2)/3 = 1/2 = 2/3 - 1/6.
    s = L.zero_one_split([[3, 1], [1, 3], [2, 2]], [0, 0, 1])
    assert s["bias"] == pytest.approx(2 / 3, abs=1e-15)
    assert s["variance_unbiased"] == pytest.approx(1 / 12, abs=1e-15)
    assert s["variance_biased"] == pytest.approx(1 / 4, abs=1e-15)
    assert s["net_variance"] == pytest.approx(-1 / 6, abs=1e-15)
    assert s["net_variance"] == pytest.approx(s["variance_unbiased"] - s["variance_biased"])
    assert s["loss"] == pytest.approx(0.5, abs=1e-15)


def _sectors(X):
    """A known deterministic rule with three classes: the angle sector of (x0, x1)."""
    angle = np.arctan2(X[:, 1], X[:, 0])
    return np.digitize(angle, [-np.pi / 3, np.pi / 3])


@pytest.mark.parametrize(
    "model", [KNeighborsClassifier(n_neighbors=9), DecisionTreeClassifier(max_depth=2)]
)
def test_zero_one_bias_plus_net_variance_is_expected_loss_known_truth(model):
    # Domingos (2000): with zero noise E[L] = B + c2 V at every point, so the averages satisfy
    # loss = bias + net variance. Measured here on fresh training sets from a known rule (labels
    # deterministic, so the optimal class is the rule's), against the directly counted loss.
    rng = np.random.default_rng(3)
    x_eval = rng.uniform(-1, 1, size=(150, 2))
    truth = _sectors(x_eval)
    votes = np.zeros((150, 3), dtype=np.int64)
    wrong = 0.0
    R = 60
    for b in range(R):
        X = rng.uniform(-1, 1, size=(60, 2))
        est = (
            DecisionTreeClassifier(max_depth=2, random_state=b) if "Tree" in repr(model) else model
        )
        pred = est.fit(X, _sectors(X)).predict(x_eval)
        np.add.at(votes, (np.arange(150), pred), 1)
        wrong += np.mean(pred != truth)
    s = L.zero_one_split(votes, truth)
    expected_loss = wrong / R
    assert s["bias"] + s["net_variance"] == pytest.approx(expected_loss, abs=1e-12)
    assert s["loss"] == pytest.approx(expected_loss, abs=1e-12)
    assert 0 < s["variance"] < 1  # the check is not vacuous: the models disagree


def test_brier_split_unbiased_on_known_truth_logistic_model():
    # Squared-error decomposition per class (common practice), summed: E Brier = bias_sq +
    # variance + noise, with noise = sum_k pi_k (1 - pi_k) known from the true probabilities.
    # (1) The small-B estimates average to the pooled ones within the Monte-Carlo SE, while
    #     the plug-in (pbar - pi)^2 is visibly biased by Var/B (so the test can fail);
    # (2) bias_sq + variance + noise matches the Brier score against fresh labels drawn from the
    #     truth, within the Monte-Carlo SE.
    rng = np.random.default_rng(11)
    m, n, R, B = 40, 30, 240, 2
    x_eval = np.column_stack([np.linspace(-2, 2, m), np.zeros(m)])
    pi1 = 1 / (1 + np.exp(-(1.5 * x_eval[:, 0] - 0.5)))
    truth = np.column_stack([1 - pi1, pi1])
    preds = np.empty((R, m, 2))
    fresh = np.empty(R)
    for r in range(R):
        X = np.column_stack([rng.uniform(-2, 2, n), rng.normal(size=n)])
        p = 1 / (1 + np.exp(-(1.5 * X[:, 0] - 0.5)))
        y = (rng.uniform(size=n) < p).astype(int)
        if y.min() == y.max():
            y[0] = 1 - y[0]
        preds[r] = LogisticRegression(C=0.5).fit(X, y).predict_proba(x_eval)
        t = (rng.uniform(size=m) < pi1).astype(int)
        fresh[r] = np.mean(L.brier_points(t, preds[r]))

    def split(block):
        mean = block.mean(axis=0)
        m2 = ((block - mean) ** 2).sum(axis=0)
        return L.brier_split(mean, m2, np.full(m, block.shape[0]), truth=truth)

    pooled = split(preds)
    batches = [split(preds[i : i + B]) for i in range(0, R, B)]
    for key in ("bias_sq", "variance"):
        est = np.array([b[key] for b in batches])
        se = est.std(ddof=1) / np.sqrt(est.size)
        assert abs(est.mean() - pooled[key]) < 4 * se + 1e-12, key
    plug_in = np.array(
        [
            np.mean(np.sum((preds[i : i + B].mean(axis=0) - truth) ** 2, axis=1))
            for i in range(0, R, B)
        ]
    )
    se_plug = plug_in.std(ddof=1) / np.sqrt(plug_in.size)
    assert plug_in.mean() - pooled["bias_sq"] > 3 * se_plug  # plug-in is biased up by Var/B
    assert pooled["noise"] == pytest.approx(np.mean(2 * pi1 * (1 - pi1)), rel=1e-12)
    se_fresh = fresh.std(ddof=1) / np.sqrt(R)
    assert abs(fresh.mean() - pooled["expected_loss"]) < 4 * se_fresh


def test_brier_split_on_data_adds_up_to_the_test_error():
    # On data (observed label only) bias_sq_plus_noise + variance is exactly the mean Brier
    # score of the out-of-sample predictions (algebra of the per-class decomposition).
    rng = np.random.default_rng(0)
    p = rng.dirichlet(np.ones(3), size=(5, 7))  # 5 predictions at 7 points
    codes = rng.integers(0, 3, 7)
    direct = np.mean([np.mean(L.brier_points(codes, p[b])) for b in range(5)])
    mean = p.mean(axis=0)
    s = L.brier_split(mean, ((p - mean) ** 2).sum(axis=0), np.full(7, 5), codes=codes)
    assert s["bias_sq_plus_noise"] + s["variance"] == pytest.approx(direct, abs=1e-14)


def test_point_losses_match_scikit_learn():
    # scikit-learn metrics as the reference (log_loss clips at float64 eps; multi-class
    # brier_score_loss sums over classes, the binary one is half of our two-class sum).
    rng = np.random.default_rng(1)
    p = rng.dirichlet(np.ones(3), size=30)
    p[0] = [1.0, 0.0, 0.0]  # clipping matters here
    codes = np.r_[1, rng.integers(0, 3, 29)]
    assert np.mean(L.log_loss_points(codes, p)) == pytest.approx(
        log_loss(codes, p, labels=[0, 1, 2]), abs=1e-12
    )
    assert np.mean(L.brier_points(codes, p)) == pytest.approx(
        brier_score_loss(codes, p, labels=[0, 1, 2]), abs=1e-12
    )
    q = p[:, :2] / p[:, :2].sum(axis=1, keepdims=True)
    c2 = codes % 2
    assert np.mean(L.brier_points(c2, q)) / 2 == pytest.approx(
        brier_score_loss(c2, q[:, 1]), abs=1e-12
    )


def test_align_proba_keeps_columns_for_a_missing_class():
    classes = np.array(["ash", "birch", "cedar"])
    out = L.align_proba([[0.2, 0.8], [0.6, 0.4]], np.array(["ash", "cedar"]), classes)
    assert out.tolist() == [[0.2, 0.0, 0.8], [0.6, 0.0, 0.4]]
    with pytest.raises(ValueError, match="'oak'"):
        L.align_proba([[1.0]], np.array(["oak"]), classes)
    with pytest.raises(ValueError, match="shape"):
        L.align_proba([[0.5, 0.5]], np.array(["ash"]), classes)


def test_as_loss_names_scorers_and_errors():
    assert L.as_loss("zero-one").response == "predict"
    assert L.as_loss("log-loss").split == "not defined"
    scorer = L.as_loss("neg_log_loss")
    assert scorer.split == "not defined" and "minus" in scorer.description
    assert L.as_loss(get_scorer("accuracy")).response == "scorer"
    with pytest.raises(ValueError, match="loss='hinge'.*zero-one"):
        L.as_loss("hinge")
    with pytest.raises(TypeError, match="loss must be"):
        L.as_loss(3)
    with pytest.raises(ValueError, match="exactly one"):
        L.brier_split([[0.5, 0.5]], [[0.0, 0.0]], [2])


def test_inputs_not_modified():
    p = np.array([[0.0, 1.0], [0.5, 0.5]])
    before = p.copy()
    L.log_loss_points([0, 1], p)
    L.brier_points([0, 1], p)
    assert np.array_equal(p, before)
