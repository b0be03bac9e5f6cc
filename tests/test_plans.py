"""Tests for complexity.plans: bootstrap, K-fold, simulation and the splitter adapter."""

import numpy as np
import pytest
from sklearn.model_selection import GroupKFold, KFold, RepeatedKFold

import complexity as cx
from complexity.plans import _SplitterPlan, as_plan, child_seed

ROOT = np.random.SeedSequence(12345)


def test_bootstrap_in_bag_and_out_of_bag_are_complements():
    # law (STYLE.md): the out-of-bag set is the complement of the in-bag set
    for r in cx.Bootstrap(30).resamples(17, ROOT):
        assert r.train.size == 17
        assert np.array_equal(np.union1d(np.unique(r.train), r.test), np.arange(17))
        assert np.intersect1d(r.train, r.test).size == 0


def test_bootstrap_oob_share_matches_theory():
    # E|OOB| / n = (1 - 1/n)^n -> e^-1 ~ 0.368 (Efron & Tibshirani 1997; METHODS.md §2)
    n = 200
    sizes = [r.test.size for r in cx.Bootstrap(400).resamples(n, ROOT)]
    share = np.mean(sizes) / n
    se = np.std(sizes) / np.sqrt(400) / n
    assert abs(share - (1 - 1 / n) ** n) < 4 * se


def test_kfold_partitions_and_repeats_differ():
    # law (scikit-learn check_cv_coverage): every sample lands in exactly one test fold per repeat
    rs = cx.CrossValidation(4, n_repeats=3).resamples(22, ROOT)
    assert len(rs) == 12
    for rep in range(3):
        tests = np.concatenate([r.test for r in rs if r.replicate == rep])
        assert sorted(tests.tolist()) == list(range(22))
        sizes = [r.test.size for r in rs if r.replicate == rep]
        assert max(sizes) - min(sizes) <= 1
    first = [r.test for r in rs if r.replicate == 0]
    second = [r.test for r in rs if r.replicate == 1]
    assert any(not np.array_equal(a, b) for a, b in zip(first, second))


def test_same_seed_same_plan_and_split_matches_resamples():
    a = [r.test for r in cx.Bootstrap(5).resamples(10, np.random.SeedSequence(1))]
    b = [t for _, t in cx.Bootstrap(5).split(np.zeros((10, 1)), random_state=1)]
    assert all(np.array_equal(x, y) for x, y in zip(a, b))
    c = [t for _, t in cx.Bootstrap(5).split(np.zeros((10, 1)), random_state=2)]
    assert any(not np.array_equal(x, y) for x, y in zip(a, c))


def test_child_seed_is_pure():
    assert (
        child_seed(ROOT, 0, 3).generate_state(2).tolist()
        == child_seed(ROOT, 0, 3).generate_state(2).tolist()
    )
    assert (
        child_seed(ROOT, 0, 3).generate_state(1)[0] != child_seed(ROOT, 0, 4).generate_state(1)[0]
    )


def test_splitter_adapter_and_repetitions():
    X = np.arange(12.0).reshape(-1, 1)
    rs = as_plan(RepeatedKFold(n_splits=3, n_repeats=2, random_state=0)).resamples(12, ROOT, X)
    assert [r.replicate for r in rs] == [0, 0, 0, 1, 1, 1]
    groups = np.repeat(np.arange(4), 3)
    rs = _SplitterPlan(GroupKFold(4)).resamples(12, ROOT, X, None, groups)
    for r in rs:
        assert len(set(groups[r.test])) == 1
    assert isinstance(as_plan(5), cx.CrossValidation)
    assert isinstance(as_plan(KFold(3)), _SplitterPlan)


class _EmptyFold:
    def split(self, X, y=None, groups=None):
        yield np.arange(1, len(X)), np.array([0])
        yield np.arange(len(X)), np.array([], dtype=int)


def test_splitter_with_empty_fold_is_refused():
    with pytest.raises(ValueError, match="empty test set in split 1"):
        _SplitterPlan(_EmptyFold()).resamples(5, ROOT, np.zeros((5, 1)))


@pytest.mark.parametrize(
    ("make", "match"),
    [
        (lambda: cx.Bootstrap(0), "n_resamples must be an int >= 2; got 0"),
        (lambda: cx.Bootstrap(2.5), "n_resamples must be an int"),
        (lambda: cx.CrossValidation(1), "n_splits must be an int >= 2; got 1"),
        (lambda: cx.CrossValidation(5, n_repeats=0), "n_repeats must be an int >= 1; got 0"),
        (lambda: cx.CrossValidation(5, n_repeats=2, shuffle=False), "would repeat the same folds"),
        (lambda: as_plan("kfold"), "plan must be"),
        (lambda: cx.Simulation(3.0, 1.0, np.arange(5.0)), "truth must be a callable"),
        (lambda: cx.Simulation(np.sin, -1.0, np.arange(5.0)), "noise_sd must be >= 0"),
        (lambda: cx.Simulation(np.sin, 1.0, lambda rng, n: rng.random(n)), "n_train is required"),
        (lambda: cx.Simulation(lambda X: X[:2, 0], 1.0, np.arange(5.0)), "returned shape"),
    ],
)
def test_plan_bad_arguments(make, match):
    with pytest.raises((TypeError, ValueError), match=match):
        make()


def test_kfold_more_splits_than_rows():
    with pytest.raises(ValueError, match="n_splits=10 is more than the number of rows"):
        cx.CrossValidation(10).resamples(5, ROOT)


def test_simulation_draws_fixed_and_sampled_designs():
    design = np.linspace(0, 1, 8)
    plan = cx.Simulation(lambda X: 2 * X[:, 0], 0.5, design, n_resamples=3)
    X1, y1 = plan.draw(child_seed(ROOT, 0, 0))
    X2, y2 = plan.draw(child_seed(ROOT, 0, 1))
    assert np.array_equal(X1, X2) and not np.array_equal(y1, y2)
    sampled = cx.Simulation(
        lambda X: X[:, 0], 0.1, lambda rng, n: rng.uniform(0, 1, n), n_train=6, x_eval=design
    )
    Xs, _ = sampled.draw(child_seed(ROOT, 0, 0))
    assert Xs.shape == (6, 1)
    bad = cx.Simulation(
        lambda X: X[:, 0], 0.1, lambda rng, n: rng.uniform(0, 1, n + 1), n_train=6, x_eval=design
    )
    with pytest.raises(ValueError, match="returned 7 rows"):
        bad.draw(child_seed(ROOT, 0, 0))


def test_reprs():
    assert repr(cx.Bootstrap(7)) == "Bootstrap(n_resamples=7)"
    assert (
        repr(cx.CrossValidation(3, 2)) == "CrossValidation(n_splits=3, n_repeats=2, shuffle=True)"
    )
