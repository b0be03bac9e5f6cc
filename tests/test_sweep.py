"""Tests for complexity.sweep: the whole job, checked against outside references."""

import warnings

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from numpy.polynomial import legendre
from sklearn.datasets import load_diabetes
from sklearn.linear_model import LinearRegression
from sklearn.model_selection import KFold, cross_val_score
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import PolynomialFeatures, StandardScaler
from sklearn.tree import DecisionTreeRegressor

import complexity as cx

pytestmark = pytest.mark.filterwarnings("ignore::complexity.CapacityWarning")


def _batch_estimates(pred, f, n_batches=10):
    """Bias² and variance estimates (METHODS.md §2 formulas) from batches of simulated fits.

    pred: (B, m) predictions at the evaluation points; f: (m,) truth there. Returns per-batch
    (bias², variance) so that their spread gives a Monte-Carlo standard error (batch means).
    """
    out = []
    for chunk in np.array_split(pred, n_batches):
        Bb = chunk.shape[0]
        s2 = chunk.var(axis=0, ddof=1)
        out.append((np.mean((chunk.mean(axis=0) - f) ** 2 - s2 / Bb), np.mean(s2)))
    return np.array(out)


def test_simulation_matches_linear_smoother_closed_form():
    # Hastie, Tibshirani & Friedman, The Elements of Statistical Learning, §7.3 (section from memory);
    # METHODS.md §1: for a linear smoother on a fixed design, Var(x0) = sigma^2 ||h(x0)||^2 and
    # bias(x0) = h(x0)^T f - f(x0). The truth is a cubic, so bias² = 0 for every degree >= 3.
    design = np.linspace(-1, 1, 12)
    x_eval = np.linspace(-0.9, 0.9, 7)

    def truth(X):
        x = X[:, 0]
        return 1 + x - 2 * x**2 + 1.5 * x**3

    sigma = 0.3
    plan = cx.Simulation(truth, sigma, design, n_resamples=1000, x_eval=x_eval)
    degrees = range(0, 6)
    result = cx.sweep(
        cx.PolynomialLadder(degrees), plan=plan, random_state=7, keep_predictions=True
    )
    f_design = truth(design[:, None])
    f_eval = truth(x_eval[:, None])
    for c, d in enumerate(degrees):
        V = legendre.legvander(design, d)
        V0 = legendre.legvander(x_eval, d)
        h = V0 @ np.linalg.solve(V.T @ V, V.T)  # rows h(x0)^T
        var_exact = sigma**2 * np.mean(np.sum(h**2, axis=1))
        bias2_exact = np.mean((h @ f_design - f_eval) ** 2)
        batches = _batch_estimates(result.predictions[:, :, c], f_eval)
        se = batches.std(axis=0, ddof=1) / np.sqrt(len(batches))
        row = result.curves.loc[d]
        assert abs(row.variance - var_exact) < 3 * se[1], (d, row.variance, var_exact, se[1])
        assert abs(row.bias_sq - bias2_exact) < 3 * se[0] + 1e-12, (d, row.bias_sq, bias2_exact)
        assert row.noise == pytest.approx(sigma**2)
        assert row.test_mse == pytest.approx(sigma**2 + row.bias_sq + row.variance, rel=1e-12)
        if d >= 3:
            assert bias2_exact < 1e-25
    assert result.noise.method == "given"


def test_coefficients_unbiased_with_gauss_markov_covariance():
    # Gauss–Markov (ESL §3.2.2, from memory; METHODS.md §1): least squares on a fixed design is
    # unbiased, E beta_hat = beta, with Cov(beta_hat) = sigma^2 (X^T X)^{-1}.
    design = np.linspace(0, 2, 10)
    beta = np.array([0.5, 1.0, -0.3])
    sigma = 0.2

    def truth(X):
        return np.polynomial.polynomial.polyval(X[:, 0], beta)

    x_eval = np.array([0.2, 1.0, 1.8])  # three points determine a quadratic
    B = 3000
    plan = cx.Simulation(truth, sigma, design, n_resamples=B, x_eval=x_eval)
    result = cx.sweep(cx.PolynomialLadder([2]), plan=plan, random_state=11, keep_predictions=True)
    V3 = np.polynomial.polynomial.polyvander(x_eval, 2)
    coefs = np.linalg.solve(V3, result.predictions[:, :, 0].T).T  # (B, 3)
    X = np.polynomial.polynomial.polyvander(design, 2)
    cov = sigma**2 * np.linalg.inv(X.T @ X)
    se_mean = np.sqrt(np.diag(cov) / B)
    assert np.all(np.abs(coefs.mean(axis=0) - beta) < 4 * se_mean)
    emp = np.cov(coefs, rowvar=False)
    # sampling SD of a sample covariance (Wishart): sqrt((S_jk^2 + S_jj S_kk) / B)
    sd = np.sqrt((cov**2 + np.outer(np.diag(cov), np.diag(cov))) / B)
    assert np.all(np.abs(emp - cov) < 4 * sd)


def _diabetes_bmi():
    data = load_diabetes()  # open data set shipped with scikit-learn
    return data.data[:, [2]], data.target  # body-mass index column, disease progression


def test_cross_validation_equals_sklearn_cross_val_score():
    # Reference: scikit-learn's cross_val_score (negative MSE) on the same folds. With unequal
    # fold sizes (442 rows, 10 folds) the pooled error is the fold-size-weighted mean of its scores.
    X, y = _diabetes_bmi()
    folds = KFold(10, shuffle=True, random_state=0)
    result = cx.sweep(cx.PolynomialLadder(range(0, 5)), X, y, plan=folds, random_state=0)
    sizes = np.array([len(t) for _, t in folds.split(X)])
    for d in range(0, 5):
        ref = make_pipeline(StandardScaler(), PolynomialFeatures(d), LinearRegression())
        scores = -cross_val_score(ref, X, y, cv=folds, scoring="neg_mean_squared_error")
        expected = np.sum(scores * sizes) / sizes.sum()
        assert result.curves.loc[d, "test_mse"] == pytest.approx(expected, rel=1e-10)
        # fold-level standard error (common practice; ESL §7.10.1, from memory)
        assert result.curves.loc[d, "test_mse_se"] == pytest.approx(
            np.std(scores, ddof=1) / np.sqrt(10), rel=1e-8
        )


def test_our_kfold_plan_hands_its_folds_to_sklearn():
    X, y = _diabetes_bmi()
    plan = cx.CrossValidation(5)
    result = cx.sweep(cx.PolynomialLadder([1, 2]), X, y, plan=plan, random_state=3)
    folds = list(plan.split(X, random_state=3))
    sizes = np.array([len(t) for _, t in folds])
    for d in (1, 2):
        ref = make_pipeline(StandardScaler(), PolynomialFeatures(d), LinearRegression())
        scores = -cross_val_score(ref, X, y, cv=folds, scoring="neg_mean_squared_error")
        assert result.curves.loc[d, "test_mse"] == pytest.approx(
            np.sum(scores * sizes) / sizes.sum(), rel=1e-10
        )


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    st.integers(4, 12),
    st.sampled_from([0.0, 1e3, 1e6]),
    st.sampled_from([1.0, 1e3]),
    st.integers(0, 2**32 - 1),
)
def test_training_error_never_rises_with_degree(n_distinct, offset, spread, seed):
    # law (METHODS.md §9, nested least squares): on a fixed training set the residual sum of squares
    # cannot rise as columns are added; it is ~0 once degree = distinct x - 1 (interpolation).
    rng = np.random.default_rng(seed)
    x = offset + spread * np.sort(rng.uniform(0, 1, n_distinct))
    x = np.repeat(x, 2)
    y = rng.normal(size=x.size) + np.repeat(rng.normal(size=n_distinct), 2)
    degrees = range(0, n_distinct)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = cx.sweep(cx.PolynomialLadder(degrees), x, y, plan=cx.Bootstrap(2), random_state=0)
    train = result.curves["train_mse"].to_numpy()
    scale = np.mean(y**2)
    assert np.all(np.diff(train) <= 1e-9 * scale)
    pure = np.mean((y - np.repeat(y.reshape(-1, 2).mean(axis=1), 2)) ** 2)
    assert train[-1] == pytest.approx(pure, rel=1e-6, abs=1e-9 * scale)


def test_n_jobs_gives_bit_identical_results():
    # design decision (DESIGN.md "Randomness"): one seed per resample, results independent of n_jobs
    X, y = _diabetes_bmi()
    ladder = cx.ParamLadder(DecisionTreeRegressor(), "max_depth", [1, 2, 3, 5])
    a = cx.sweep(ladder, X[:150], y[:150], plan=cx.Bootstrap(12), random_state=5, n_jobs=1)
    b = cx.sweep(ladder, X[:150], y[:150], plan=cx.Bootstrap(12), random_state=5, n_jobs=2)
    pd.testing.assert_frame_equal(a.curves, b.curves, check_exact=True)
    pd.testing.assert_series_equal(a.stability, b.stability, check_exact=True)
    assert a.recommended == b.recommended


def test_none_seed_is_recorded_and_repeatable():
    X, y = _diabetes_bmi()
    a = cx.sweep(cx.PolynomialLadder([0, 1]), X, y, plan=cx.Bootstrap(5))
    entropy = a.metadata["seed_entropy"]
    b = cx.sweep(
        cx.PolynomialLadder([0, 1]),
        X,
        y,
        plan=cx.Bootstrap(5),
        random_state=np.random.SeedSequence(entropy),
    )
    pd.testing.assert_frame_equal(a.curves.drop(columns=[]), b.curves, check_exact=True)


class _FailsAtDepth(DecisionTreeRegressor):
    """A tree that refuses to grow deeper than 2 (to test failure handling)."""

    def fit(self, X, y, sample_weight=None):
        if self.max_depth is not None and self.max_depth > 2:
            raise RuntimeError(f"depth {self.max_depth} not allowed here")
        return super().fit(X, y, sample_weight=sample_weight)


def test_failed_fits_are_recorded_and_sweep_goes_on():
    X, y = _diabetes_bmi()
    ladder = cx.ParamLadder(_FailsAtDepth(), "max_depth", [1, 2, 3])
    result = cx.sweep(ladder, X[:80], y[:80], plan=cx.Bootstrap(6), random_state=0)
    assert result.failures.loc[3, "count"] == 7  # 6 resamples + the full-data fit
    assert "depth 3 not allowed here" in result.failures.loc[3, "first_message"]
    assert np.isnan(result.curves.loc[3, "test_mse"])
    assert result.recommended in (1, 2)
    assert "failed" in result.summary()


def test_every_fit_failing_raises_with_first_message():
    X, y = _diabetes_bmi()
    ladder = cx.ParamLadder(_FailsAtDepth(), "max_depth", [3, 4])
    with pytest.raises(cx.SweepFailedError, match="depth 3 not allowed here"):
        cx.sweep(ladder, X[:40], y[:40], plan=cx.Bootstrap(3), random_state=0)


def test_bootstrap_columns_and_keep_predictions():
    X, y = _diabetes_bmi()
    r = cx.sweep(
        cx.PolynomialLadder([0, 1, 2]),
        X[:60],
        y[:60],
        plan=cx.Bootstrap(8),
        random_state=1,
        keep_predictions=True,
    )
    for col in (
        "train_mse",
        "test_mse",
        "test_mse_se",
        "bias_sq",
        "variance",
        "noise",
        "bias_sq_plus_noise",
        "test_mse_632",
        "test_mse_632plus",
    ):
        assert col in r.curves
    assert r.predictions.shape == (8, 60, 3)
    assert r.stability.sum() == pytest.approx(1.0)
    assert r.rules.loc[r.rule, "capacity"] == r.recommended
    # .632 lies between training and out-of-bag error
    c = r.curves
    assert np.all(c["test_mse_632"] <= c["test_mse"] + 1e-12)
    assert np.all(c["test_mse_632"] >= c["train_mse"] - 1e-12)


X_OK = np.linspace(0, 1, 20)
Y_OK = np.sin(3 * X_OK)


@pytest.mark.parametrize(
    ("kwargs", "error", "match"),
    [
        ({"X": np.r_[X_OK[:-1], np.nan]}, ValueError, r"X contains NaN or infinite values"),
        ({"y": np.r_[Y_OK[:-1], np.inf]}, ValueError, r"y contains NaN or infinite values"),
        ({"y": Y_OK[:-1]}, ValueError, r"X has 20 rows, y has 19 values"),
        ({"X": np.empty(0), "y": np.empty(0)}, ValueError, r"X is empty"),
        ({"X": X_OK[:1], "y": Y_OK[:1]}, ValueError, r"at least 3 are needed"),
        (
            {"X": np.repeat(X_OK[:4], 5)},
            ValueError,
            r"degrees reach 5, which needs 6 coefficients, but X has only 4 distinct",
        ),
        ({"X": np.full(20, 3.0)}, ValueError, r"is constant"),
        ({"X": pd.DataFrame({"t": ["a"] * 20})}, TypeError, r"non-numeric columns \['t'\]"),
        (
            {"X": np.array(["1"] * 19 + ["x"], dtype=object)},
            TypeError,
            r"X must contain only numbers",
        ),
        (
            {"plan": cx.CrossValidation(30)},
            ValueError,
            r"n_splits=30 is more than the number of rows",
        ),
        ({"noise": -1.0}, ValueError, r"noise"),
        ({"rule": "smallest"}, ValueError, r"rule must be one of"),
        (
            {
                "rule": "aic",
                "ladder": cx.ParamLadder(DecisionTreeRegressor(), "max_depth", [1, 2]),
                "engine": "generic",
            },
            ValueError,
            r"rule='aic' needs the closed-form criteria",
        ),
        ({"ladder": "degree"}, TypeError, r"ladder must be"),
        ({"engine": "fast"}, ValueError, r"engine must be one of"),
        ({"progress": "yes"}, TypeError, r"progress must be True or False"),
        ({"random_state": -3}, ValueError, r"random_state must be a non-negative int"),
    ],
)
def test_bad_input_messages(kwargs, error, match):
    args = {
        "ladder": cx.PolynomialLadder(range(0, 6)),
        "X": X_OK,
        "y": Y_OK,
        "plan": cx.Bootstrap(3),
    }
    args.update(kwargs)
    ladder = args.pop("ladder")
    with pytest.raises(error, match=match):
        cx.sweep(ladder, args.pop("X"), args.pop("y"), **args)


@pytest.mark.parametrize(
    ("make", "match"),
    [
        (lambda: cx.PolynomialLadder([-1, 2]), r"degrees must contain whole numbers >= 0; got -1"),
        (lambda: cx.PolynomialLadder([1.5]), r"degrees must contain whole numbers"),
        (lambda: cx.PolynomialLadder([]), r"degrees is empty"),
        (lambda: cx.PolynomialLadder([1, 1]), r"repeated values \[1\]"),
    ],
)
def test_bad_ladder_messages(make, match):
    with pytest.raises((TypeError, ValueError), match=match):
        make()


def test_inputs_are_not_modified():
    X, y = _diabetes_bmi()
    X, y = X[:50].copy(), y[:50].copy()
    before = (X.tobytes(), y.tobytes())
    frame = pd.DataFrame({"bmi": X[:, 0]})
    frame_before = frame.copy()
    cx.sweep(cx.PolynomialLadder([0, 1, 2]), X, y, plan=cx.Bootstrap(3), random_state=0)
    cx.sweep(
        cx.PolynomialLadder([0, 1, 2]), frame, pd.Series(y), plan=cx.Bootstrap(3), random_state=0
    )
    assert (X.tobytes(), y.tobytes()) == before
    pd.testing.assert_frame_equal(frame, frame_before)


def test_simulation_needs_no_data_and_describes_observed_data():
    plan = cx.Simulation(lambda X: X[:, 0] ** 2, 0.1, np.linspace(0, 1, 10), n_resamples=20)
    r = cx.sweep(cx.PolynomialLadder([0, 1, 2]), plan=plan, random_state=0)
    assert r.metadata["n_samples"] is None
    r2 = cx.sweep(
        cx.PolynomialLadder([0, 1, 2]), np.arange(5.0), np.arange(5.0), plan=plan, random_state=0
    )
    assert r2.metadata["n_samples"] == 5
    pd.testing.assert_frame_equal(r.curves, r2.curves, check_exact=True)
