"""What the benchmark scripts share: their synthetic data and the baseline's conditioning rule."""

from __future__ import annotations

import numpy as np
from sklearn.preprocessing import PolynomialFeatures, StandardScaler


def data(n: int, seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    """Synthetic curve: x uniform on [0, 1] (sorted), y = sin(6x) + 0.3x + N(0, 0.2^2)."""
    rng = np.random.default_rng(seed)
    X = np.sort(rng.uniform(0.0, 1.0, n))[:, None]
    y = np.sin(6.0 * X[:, 0]) + 0.3 * X[:, 0] + rng.normal(0.0, 0.2, n)
    return X, y


def well_conditioned(X: np.ndarray, degree: int) -> list[int]:
    """Degrees at which the scikit-learn baseline's own problem is well conditioned.

    What ``LinearRegression`` solves after ``StandardScaler`` and ``PolynomialFeatures``: the
    powers of the scaled x, centred (no bias column). Degrees whose 2-norm condition number is
    below 1e5 are kept; beyond that the baseline itself is not accurate (``LinearRegression``
    truncates singular values once the condition number passes 1e6).
    """
    good = [0]
    for d in range(1, degree + 1):
        powers = PolynomialFeatures(d, include_bias=False).fit_transform(
            StandardScaler().fit_transform(X)
        )
        if np.linalg.cond(powers - powers.mean(axis=0)) < 1e5:
            good.append(d)
    return good
