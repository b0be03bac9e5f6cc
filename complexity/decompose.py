"""From accumulated residuals to the curves: test error and its SE, squared bias, variance, noise.

For every capacity, with per-point out-of-sample residuals d_ib = prediction - target over the B_i
resamples that scored point i (METHODS.md §2, after Efron & Tibshirani 1997)::

    e_i   = mean_b d_ib^2                       per-point test error
    s_i^2 = sample variance of d_ib (ddof 1)    per-point variance of the prediction
    ERR   = mean_i e_i
    VAR   = mean_i s_i^2
    NB2   = mean_i [ mean_b(d_ib)^2 - s_i^2 / B_i ]      noise + squared bias
    BIAS2 = NB2 - sigma2_hat

so that ERR = NB2 + VAR exactly, and ERR = sigma2_hat + BIAS2 + VAR. With real data the targets
are noisy observations, so NB2 mixes noise and squared bias: resampling one data set cannot tell a
systematic error from noise, and only an outside noise estimate (replicates, differences,
neighbours; :mod:`complexity.noise`) splits them. In a :class:`~complexity.Simulation` the target
is the true function, so BIAS2 is measured directly and the noise variance is known.

Standard errors (``test_mse_se``), by plan:

- bootstrap: point level, ``s(e_i) / sqrt(n')`` over the n' scored points;
- K-fold and other splitters: split level, ``s(CV_j) / sqrt(J)`` over the J split scores (ddof 1);
- simulation: Monte-Carlo standard error across the simulated training sets.

Both data-based forms ignore the positive correlations between overlapping training sets, so they
are somewhat too small (Bengio & Grandvalet 2004: no unbiased estimator of the variance of K-fold
CV exists); read the one-standard-error rule with that in mind. Points enter the bootstrap figures
only when at least two resamples left them out (so their variance is defined); with 50 or more
resamples that is essentially every point.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from .accumulate import PointAccumulator
from .ladders import capacity_index

__all__ = ["bootstrap_632", "curves_table", "no_information_error", "replicate_curves"]

#: weights of the .632 estimators, rounded as in Efron (1983) and Efron & Tibshirani (1997)
W632 = 0.632
W368 = 0.368


def _per_point(acc: PointAccumulator, c: int, min_count: int) -> dict[str, NDArray[np.float64]]:
    n = acc.count[:, c]
    keep = n >= min_count
    return _point_values(n[keep], acc.mean[keep, c], acc.m2[keep, c])


def _point_values(
    n: NDArray[np.float64], mean: NDArray[np.float64], m2: NDArray[np.float64]
) -> dict[str, NDArray[np.float64]]:
    """Per-point test error ``e``, variance ``s2``, mean residual and count (any leading shape)."""
    B = np.asarray(n, dtype=np.float64)
    e = mean**2 + m2 / B
    s2 = np.divide(m2, B - 1, out=np.full_like(m2, np.nan), where=B > 1)
    return {"e": e, "s2": s2, "mean": mean, "B": B}


def _all_capacities(acc: PointAccumulator, min_count: int) -> list[dict[str, NDArray[np.float64]]]:
    """``_per_point`` for every capacity at once when all capacities count alike (no failures).

    The kept points are then the same for every capacity: one selection of rows, and each
    capacity's values as a contiguous row (so its sums are the same pairwise sums).
    """
    n = acc.count[:, 0]
    keep = n >= min_count
    every = bool(keep.all())  # the usual case: no selection to copy
    mean_t = np.ascontiguousarray((acc.mean if every else acc.mean[keep]).T)
    m2_t = np.ascontiguousarray((acc.m2 if every else acc.m2[keep]).T)
    values = _point_values(np.broadcast_to(n[keep], mean_t.shape), mean_t, m2_t)
    return [{k: v[c] for k, v in values.items()} for c in range(mean_t.shape[0])]


def _split_se(loss: NDArray[np.float64], n: NDArray[np.int64]) -> float:
    """Standard error from split-level scores: s(score_j) / sqrt(J), ddof 1."""
    ok = n > 0
    if ok.sum() < 2:
        return float("nan")
    scores = loss[ok] / n[ok]
    return float(np.std(scores, ddof=1) / np.sqrt(ok.sum()))


def no_information_error(y: NDArray[np.float64], fitted: NDArray[np.float64]) -> float:
    """No-information error rate gamma for squared loss (Efron & Tibshirani 1997).

    The error of the full-data predictions if responses and predictors were unrelated:
    ``(1/n^2) sum_i sum_j (y_i - fitted_j)^2 = var0(y) + var0(fitted) + (mean y - mean fitted)^2``.

    Examples
    --------
    METHODS.md §3 worked check: x = 0..4, y = (1, 3, 2, 5, 4), least-squares line.

    >>> import numpy as np
    >>> y = np.array([1.0, 3.0, 2.0, 5.0, 4.0])
    >>> round(no_information_error(y, np.array([1.4, 2.2, 3.0, 3.8, 4.6])), 10)
    3.28
    """
    return float(np.var(y) + np.var(fitted) + (np.mean(y) - np.mean(fitted)) ** 2)


def bootstrap_632(err_bar: float, err1: float, gamma: float) -> tuple[float, float]:
    """The .632 and .632+ bootstrap estimates of prediction error.

    Parameters
    ----------
    err_bar : float
        Training (apparent) error of the model fitted on all the data.
    err1 : float
        Leave-one-out bootstrap error (out-of-bag, averaged per point, then over points).
    gamma : float
        No-information error rate (:func:`no_information_error`).

    Returns
    -------
    err632, err632plus : float

    Notes
    -----
    Efron (1983); Efron & Tibshirani (1997), with their boundary rules: ``Err1' = min(Err1,
    gamma)`` and the relative overfitting rate ``R' = (Err1' - err_bar) / (gamma - err_bar)`` if
    both differences are positive, else 0; then ``Err632+ = Err632 + (Err1' - err_bar) * .368 *
    .632 * R' / (1 - .368 R')``. Weights use the rounded .632/.368, as the papers do.

    Examples
    --------
    METHODS.md §3 worked check: err_bar = 0.1, Err1 = 0.3, gamma = 0.5.

    >>> e632, e632p = bootstrap_632(0.1, 0.3, 0.5)
    >>> round(e632, 6), round(e632p, 6)
    (0.2264, 0.254902)
    """
    err632 = W368 * err_bar + W632 * err1
    err1p = min(err1, gamma)
    if err1p > err_bar and gamma > err_bar:
        rate = (err1p - err_bar) / (gamma - err_bar)
    else:
        rate = 0.0
    err632p = err632 + (err1p - err_bar) * W368 * W632 * rate / (1 - W368 * rate)
    return float(err632), float(err632p)


def curves_table(
    acc: PointAccumulator,
    capacities: tuple[Any, ...],
    capacity_name: str,
    *,
    noise: float,
    plan_kind: str,
    train_mse: NDArray[np.float64] | None = None,
    y: NDArray[np.float64] | None = None,
    fitted: NDArray[np.float64] | None = None,
) -> tuple[pd.DataFrame, list[str]]:
    """Build the curves DataFrame (one row per capacity) and a list of notes.

    Parameters
    ----------
    acc : PointAccumulator
    capacities : tuple
        The capacity values, simplest first.
    capacity_name : str
        Name of the index (e.g. "degree").
    noise : float
        The noise variance (estimated, given, or known in a simulation).
    plan_kind : str
        "bootstrap", "cross-validation", "splitter" or "simulation".
    train_mse : ndarray, optional
        Training error of the full-data fit per capacity (data plans).
    y, fitted : ndarray, optional
        Observed y and full-data fitted values per capacity (for the .632 estimators).

    Returns
    -------
    curves : pandas.DataFrame
    notes : list of str
    """
    simulated = plan_kind == "simulation"
    notes: list[str] = []
    rows = []
    uniform = acc.count.strides[1] == 0  # one count per point (no fit failed)
    if uniform:
        decomposable_all = int((acc.count[:, 0] >= 2).sum()) >= 2
        every = _all_capacities(acc, 2 if decomposable_all else 1)
    for c in range(len(capacities)):
        if uniform:
            decomposable, pp = decomposable_all, every[c]
        else:
            decomposable = int((acc.count[:, c] >= 2).sum()) >= 2
            pp = _per_point(acc, c, 2 if decomposable else 1)
        n_pts = pp["e"].size
        row: dict[str, Any] = {}
        if train_mse is not None:
            row["train_mse"] = float(train_mse[c])
        else:
            row["train_mse"] = (
                float(acc.train_sum[c] / acc.train_n[c]) if acc.train_n[c] else np.nan
            )
        err = float(np.mean(pp["e"])) if n_pts else np.nan
        if decomposable:
            var = float(np.mean(pp["s2"]))
            nb2 = float(np.mean(pp["mean"] ** 2 - pp["s2"] / pp["B"]))
        else:
            var = nb2 = np.nan
        if simulated:
            row["test_mse"] = noise + err
            row["test_mse_se"] = _split_se(acc.resample_loss[:, c], acc.resample_n[:, c])
            row["bias_sq"] = nb2
            row["bias_sq_plus_noise"] = nb2 + noise
        else:
            row["test_mse"] = err
            if plan_kind == "bootstrap":
                row["test_mse_se"] = (
                    float(np.std(pp["e"], ddof=1) / np.sqrt(n_pts)) if n_pts > 1 else np.nan
                )
            else:
                row["test_mse_se"] = _split_se(acc.resample_loss[:, c], acc.resample_n[:, c])
            row["bias_sq"] = nb2 - noise
            row["bias_sq_plus_noise"] = nb2
        row["variance"] = var
        row["noise"] = noise
        if (
            plan_kind == "bootstrap"
            and train_mse is not None
            and y is not None
            and fitted is not None
        ):
            if np.isfinite(train_mse[c]) and n_pts:
                row["test_mse_632"], row["test_mse_632plus"] = bootstrap_632(
                    float(train_mse[c]), err, no_information_error(y, fitted[:, c])
                )
            else:
                row["test_mse_632"] = row["test_mse_632plus"] = np.nan
        row["n_scored"] = n_pts
        row["failed_fits"] = int(acc.failures.count[c])
        rows.append(row)
    curves = pd.DataFrame(rows, index=capacity_index(capacities, capacity_name))
    if curves["variance"].isna().all():
        notes.append(
            "variance and bias_sq need every point predicted by at least two models; this plan "
            "predicts each point once (use CrossValidation(..., n_repeats=2) or more, or Bootstrap)."
        )
    if not simulated and (curves["bias_sq"] < 0).any():
        neg = [str(k) for k in curves.index[curves["bias_sq"] < 0]]
        notes.append(
            f"bias_sq is negative at {capacity_name} {', '.join(neg)}: the noise estimate exceeds "
            "noise + squared bias there (noise overestimated, or too few data); the raw value is kept, "
            "read it as ~0."
        )
    return curves, notes


def replicate_curves(
    acc: PointAccumulator, noise: float, simulated: bool
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Test-error curve and its point-level SE for each replicate, shape (n_replicates, C)."""
    n = acc.replicate_n.astype(np.float64)
    with np.errstate(invalid="ignore", divide="ignore"):
        mse = acc.replicate_loss / n
        second = acc.replicate_loss2 / n
        sd = np.sqrt(np.maximum(second - mse**2, 0.0) * n / (n - 1))
        se = sd / np.sqrt(n)
    if simulated:
        mse = mse + noise
    return mse, se
