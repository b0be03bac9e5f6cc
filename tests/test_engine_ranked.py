"""The ranked least-squares engine against the generic clone-and-fit engine (same resamples).

Reference: scikit-learn's LinearRegression inside the generic engine's pipelines, on
scikit-learn's diabetes data and on synthetic California-housing-like data (synthetic).
"""

import numpy as np
import pytest
from sklearn.datasets import load_diabetes

import complexity as cx


def _housing_like(n: int = 600) -> tuple[np.ndarray, np.ndarray]:
    """Synthetic data shaped like California housing (8 skewed, correlated predictors)."""
    rng = np.random.default_rng(3)
    Z = rng.normal(size=(n, 8))
    X = np.column_stack([np.exp(0.5 * Z[:, 0]), Z[:, 1] * 10 + 30, Z[:, :3] @ [1, 0.5, 0.2]])
    X = np.column_stack([X, rng.gamma(2.0, 1.0, (n, 5))])
    y = 0.8 * X[:, 0] - 0.02 * X[:, 1] + 0.3 * X[:, 4] + rng.normal(0, 0.5, n)
    return X, y


def _curves(result: cx.SweepResult) -> np.ndarray:
    return result.curves.select_dtypes("number").to_numpy()


@pytest.mark.parametrize("order", ["correlation", "f-test"])
@pytest.mark.parametrize("data", ["diabetes", "housing"])
def test_ranked_exact_equals_generic(order: str, data: str) -> None:
    X, y = load_diabetes(return_X_y=True) if data == "diabetes" else _housing_like()
    ladder = cx.FeatureLadder(range(0, 9), order=order)
    kw = dict(plan=cx.Bootstrap(15), random_state=1)
    fast = cx.sweep(ladder, X, y, **kw)
    slow = cx.sweep(ladder, X, y, engine="generic", **kw)
    assert fast.metadata["engine"] == "exact-ranked"
    assert slow.metadata["engine"] == "generic"
    # common practice: the same least-squares fits agree to rounding
    np.testing.assert_allclose(_curves(fast), _curves(slow), rtol=1e-10, atol=1e-12)


def test_ranked_n_jobs_independent() -> None:
    X, y = _housing_like(300)
    ladder = cx.FeatureLadder([1, 3, 5], order="correlation")
    one = cx.sweep(ladder, X, y, plan=cx.Bootstrap(8), random_state=2, n_jobs=1)
    two = cx.sweep(ladder, X, y, plan=cx.Bootstrap(8), random_state=2, n_jobs=2)
    np.testing.assert_array_equal(_curves(one), _curves(two))
