"""Tests for complexity.sweep: the whole job, checked against outside references."""

import warnings

import _nist
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


# ---------------------------------------------------------------- stability, noise guard, edges


def _quiet_sweep(*args, **kwargs):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return cx.sweep(*args, **kwargs)


@pytest.mark.parametrize(
    ("make_data", "ladder", "plan"),
    [
        (cx.datasets.pressure_sensor, cx.PolynomialLadder(range(0, 11)), cx.Bootstrap(200)),
        (
            lambda: load_diabetes(return_X_y=True, as_frame=True),
            cx.FeatureLadder(range(1, 11), order="f-test"),
            cx.CrossValidation(10, n_repeats=3),
        ),
        (
            lambda: load_diabetes(return_X_y=True, as_frame=True),
            cx.FeatureLadder(range(1, 11)),
            cx.CrossValidation(10, n_repeats=5),
        ),
    ],
    ids=["demo-bootstrap", "diabetes-ftest-cv10x3", "diabetes-cv10x5"],
)
def test_recommended_capacity_has_the_largest_stability_share(make_data, ladder, plan):
    # METHODS.md §8: replicates use the headline rule at the headline scale, so the recommended
    # capacity's share is the largest, or within one Monte-Carlo SE sqrt(p(1-p)/B) of it
    # (scikit-learn's bundled diabetes data: the case where the old share was 0 %)
    X, y = make_data()
    result = _quiet_sweep(ladder, X, y, plan=plan, random_state=0)
    share = result.stability
    chosen = share.loc[result.recommended]
    n_rep = result.metadata["n_replicates"]
    top = share.max()
    assert chosen >= top - np.sqrt(top * (1 - top) / n_rep) - 1e-12, share.tolist()


def test_single_replicate_and_criteria_report_stability_unavailable():
    X, y = cx.datasets.pressure_sensor()
    one = _quiet_sweep(cx.PolynomialLadder(range(0, 6)), X, y, plan=cx.CrossValidation(10))
    assert one.stability.isna().all()
    assert "several replicates" in one.metadata["stability_note"]
    assert "several replicates" in one.summary()
    bic = _quiet_sweep(cx.PolynomialLadder(range(0, 6)), X, y, plan=cx.Bootstrap(20), rule="bic")
    assert bic.stability.isna().all()
    assert "not available for rule='bic'" in bic.metadata["stability_note"]


def test_repeats_do_not_move_the_one_se_pick():
    # the standard error no longer shrinks as 1/sqrt(R K) (Bengio & Grandvalet 2004), so the
    # one-SE pick on scikit-learn's diabetes data, fixed order, is the same for R = 1, 2, 5, 20
    # (it was 7 at R = 1 and 9 for R >= 2)
    X, y = load_diabetes(return_X_y=True)
    picks = {
        R: _quiet_sweep(
            cx.FeatureLadder(range(1, 11)),
            X,
            y,
            plan=cx.CrossValidation(10, n_repeats=R),
            random_state=0,
        ).recommended
        for R in (1, 2, 5, 20)
    }
    assert len(set(picks.values())) == 1, picks


def test_noise_estimate_that_the_curve_contradicts_is_replaced():
    # NIST StRD Wampler3 (certified residual SD 2360.14502379268, so sigma² = 5.5702845e6): the
    # difference estimator gives ~6e8, above the lowest test error ~2.8e7; the guard replaces it
    # by the residual mean square at the lowest test error, which is the certified value
    case = _nist.load("Wampler3")
    with pytest.warns(cx.CapacityWarning, match="exceeds the lowest test error"):
        result = cx.sweep(cx.PolynomialLadder(range(0, 10)), case.X, case.y, random_state=0)
    assert result.noise.method == "curve-bound"
    assert result.noise.value == pytest.approx(case.residual_sd**2, rel=1e-9)
    assert "differences" in result.noise.detail  # what was replaced is kept in the record
    assert result.recommended == case.polynomial_degree
    assert result.curves["bias_sq"].loc[case.polynomial_degree] >= -0.5 * result.noise.value


def test_given_noise_is_kept_even_when_contradicted():
    X, y = cx.datasets.pressure_sensor()
    with pytest.warns(cx.CapacityWarning, match="kept because it was given"):
        result = cx.sweep(cx.PolynomialLadder(range(0, 6)), X, y, plan=cx.Bootstrap(20), noise=1.0)
    assert result.noise.value == 1.0


def test_a_rule_at_the_end_of_the_ladder_says_so():
    # common practice: a minimum at the edge of a search range is not a minimum of the curve
    X, y = cx.datasets.pressure_sensor()
    with pytest.warns(cx.CapacityWarning, match="highest degree tried"):
        result = cx.sweep(cx.PolynomialLadder(range(0, 3)), X, y, plan=cx.Bootstrap(20))
    assert any("extend it with more flexible values" in n for n in result.notes)
    assert "extend it" in result.summary()


def _sequential_f_degree(x, y, top, alpha=0.05):
    """Highest degree whose step from the one below is significant by the nested F test.

    NIST/SEMATECH e-Handbook §4.4.4 and Draper & Smith (lack of fit / extra sum of squares;
    section numbers from memory); RSS from numpy's Legendre fit on the scaled domain, p-values
    from scipy.stats.f.
    """
    from numpy.polynomial import Legendre
    from scipy import stats

    n = len(y)
    rss = [float(np.sum((y - Legendre.fit(x, y, d)(x)) ** 2)) for d in range(top + 1)]
    supported = 0
    for d in range(1, top + 1):
        df = n - d - 1
        F = (rss[d - 1] - rss[d]) / (rss[d] / df)
        if stats.f.sf(F, 1, df) < alpha:
            supported = d
    return supported


@pytest.mark.parametrize(
    ("name", "top"), [("Pontius", 9), ("Filip", 12), ("Wampler3", 9), ("Norris", 9)]
)
def test_default_call_recommends_the_degree_the_f_test_supports(name, top):
    # NIST StRD data (tests/data); the default plan (repeated 10-fold) and rule (one-se) must
    # agree with the sequential nested F test at 5 % (on Filip the bootstrap picked 6, F gives 11)
    case = _nist.load(name)
    x = case.X[:, 0]
    expected = _sequential_f_degree(x, case.y, top)
    result = _quiet_sweep(cx.PolynomialLadder(range(0, top + 1)), case.X, case.y, random_state=0)
    assert result.metadata["plan"]["kind"] == "cross-validation"
    assert result.recommended == expected


@pytest.mark.parametrize("name", ["Wampler1", "Wampler2"])
def test_default_call_on_exact_polynomial_data_recommends_the_certified_degree(name):
    # NIST StRD Wampler1/2: y is exactly a degree-5 polynomial (certified residual SD 0), so the
    # F test is undefined from degree 5 on; every rule must pick the certified degree 5
    case = _nist.load(name)
    result = _quiet_sweep(cx.PolynomialLadder(range(0, 10)), case.X, case.y, random_state=0)
    assert result.recommended == case.polynomial_degree
    assert set(result.rules["capacity"]) == {case.polynomial_degree}


def test_default_call_on_the_demo_and_a_known_quadratic():
    # regression checks on invented data: the synthetic demo keeps the degree the bootstrap
    # default gave (4; its drift is a logistic knee, no polynomial is exact), and a simulated
    # quadratic with clear signal gives the true degree 2
    X, y = cx.datasets.pressure_sensor()
    assert _quiet_sweep(cx.PolynomialLadder(range(0, 11)), X, y, random_state=0).recommended == 4
    rng = np.random.default_rng(0)
    x = rng.uniform(-1, 1, 80)
    y2 = 1 + 2 * x - 1.5 * x**2 + rng.normal(0, 0.2, 80)
    assert _quiet_sweep(cx.PolynomialLadder(range(0, 8)), x, y2, random_state=0).recommended == 2


@pytest.mark.parametrize(
    ("name", "target"), [("longley", "TOTEMP"), ("statecrime", "murder"), ("ccard", "AVGEXP")]
)
def test_several_predictor_noise_does_not_exceed_the_curve(name, target):
    # statsmodels' bundled data sets, where the first-neighbour estimate exceeded the lowest test
    # error: now the noise stays within one SE of the lowest test error (test error >= noise)
    sm = pytest.importorskip("statsmodels.api")
    data = getattr(sm.datasets, name).load_pandas().data
    y = data[target]
    X = data.drop(columns=[target]).select_dtypes("number")
    result = _quiet_sweep(cx.FeatureLadder(range(1, X.shape[1] + 1)), X, y, random_state=0)
    best = int(np.argmin(result.curves["test_mse"].to_numpy()))
    low, se = result.curves["test_mse"].iloc[best], result.curves["test_mse_se"].iloc[best]
    own = result.noise.se or 0.0
    assert result.noise.value <= low + np.hypot(se, own) + 1e-12
    if name == "longley":
        # the fallback is the residual mean square of the full model: statsmodels' OLS scale
        ols = sm.OLS(y, sm.add_constant(X)).fit()
        assert result.noise.method == "curve-bound"
        assert result.recommended == X.shape[1]
        assert result.noise.value == pytest.approx(ols.scale, rel=1e-6)


def test_accidental_ties_are_not_taken_for_replicates():
    # statsmodels' Engel data: 235 rows, 4 tied incomes and 2 duplicated rows; pure error from
    # 4 df gave 590 against ~11,640 by differences (Gasser et al. 1986, METHODS.md §7.4)
    sm = pytest.importorskip("statsmodels.api")
    engel = sm.datasets.engel.load_pandas().data
    with pytest.warns(cx.CapacityWarning, match="too few to measure the noise as pure error"):
        result = cx.sweep(
            cx.PolynomialLadder(range(0, 5)), engel[["income"]], engel["foodexp"], random_state=0
        )
    assert result.noise.method == "differences"
    assert 9_000 < result.noise.value < 14_000


@pytest.mark.parametrize("plan", [cx.Bootstrap(20), cx.CrossValidation(5, n_repeats=2)])
def test_interpolated_points_leave_the_closed_form_variance_empty_with_a_note(plan):
    # degree 2 through 4 distinct x, one of them alone: the full-data fit passes through it
    # (leverage 1), so sigma² h / (1 - h) is undefined there (METHODS.md §1); found by the
    # hostile-input fuzzing
    x = np.array([0.0] * 8 + [1.0, 2.8646e4, 6.676e3])
    y = np.r_[np.zeros(10), 1.0]
    result = _quiet_sweep(cx.PolynomialLadder([0, 1, 2]), x, y, plan=plan, random_state=0)
    row = result.curves.loc[2]
    assert np.isnan(row["bias_sq"])
    if isinstance(plan, cx.CrossValidation):
        assert row["oob_excess"] == 0.0  # K-fold has no out-of-bag excess
    assert any("passes through some points exactly" in n for n in result.notes)
