"""From accumulated residuals to the curves: test error and its SE, squared bias, variance, noise.

For every capacity and point i, with out-of-sample residuals d_ib = prediction - target over the
B_i resamples that scored i (METHODS.md §2, after Efron & Tibshirani 1997)::

    e_i   = mean_b d_ib^2                        per-point test error (every point with B_i >= 1)
    s_i^2 = sample variance of d_ib (ddof 1)     raw spread of the predictions (B_i >= 2)
    ERR   = mean_i e_i                           test_mse (Err^(1) for the bootstrap)

The parts are stated for one training size (:func:`relation` gives the sentence):

- **variance** at that size. Bootstrap (size n): mean s_i^2. K-fold and random splits (size r):
  a point's training sets are random r-subsets of the N = n - 1 other rows, so the spread is only
  the part of the variance that comes from which rows are left out with it. The delete-d
  jackknife scales it: V = s^2 N / d with d = N - r (Shao & Tu 1995, §2.3; exact for a mean and
  conservative in general, Efron & Stein 1981). For least squares the law of total variance is
  used instead: V = s^2 + Var(fbar_i), with Var(fbar_i) = sigma² h_i / (1 - h_i), the
  Gauss-Markov variance of the fit on the other rows (METHODS.md §1). The jackknife is
  heavy-tailed at high degree; this form is steady.
- **oob_excess** (bootstrap only): Var(fbar_i), estimated as above for least squares and by
  s_i^2 otherwise. It is the extra variance of models trained on bootstrap samples, which makes
  the out-of-bag error too high (E[(y_i - fbar_i)^2] = sigma² + b_i^2 + Var(fbar_i)).
- **bias_sq** = ERR - noise - variance - oob_excess, and ``bias_sq_plus_noise`` = bias_sq +
  noise. So ``test_mse = noise + bias_sq + variance + oob_excess`` holds exactly wherever the
  parts are defined. In a :class:`~complexity.Simulation` the target is the true function, so
  bias_sq is measured directly and the noise variance is known.

A part that a plan cannot estimate is NaN, and a note gives the reason. This happens for one
K-fold pass (every point predicted once), for leave-one-out with a ladder that is not least
squares, and for splitters whose training sets are not random subsets of the rows.

Standard errors (``test_mse_se``), by plan:

- bootstrap: point level, ``s(e_i) / sqrt(n')`` over the n' scored points;
- K-fold: fold level within each pass, ``s(CV_k) / sqrt(K)``, root-mean-square over the passes.
  Repeating passes does not shrink it, because the passes share one data set;
- other random splits: Nadeau & Bengio (2003), ``sqrt((1/J + n_test/n_train) s^2)``;
- simulation: Monte-Carlo standard error across the simulated training sets.

Bengio & Grandvalet (2004) show that no unbiased estimator of the variance of K-fold CV exists.
These are estimates with known, moderate bias.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from ._labels import capacity_index
from .accumulate import PointAccumulator
from .plans import SplitLayout

__all__ = [
    "bootstrap_632",
    "curves_table",
    "no_information_error",
    "relation",
    "replicate_errors",
    "standard_error_text",
]

_GROUP_DOUBLES = 500_000  # capacities read together: at most this many doubles per array (4 MB)

#: weights of the .632 estimators, rounded as in Efron (1983) and Efron & Tibshirani (1997)
W632 = 0.632
W368 = 0.368


def _point_values(
    n: NDArray[np.float64], mean: NDArray[np.float64], m2: NDArray[np.float64]
) -> dict[str, NDArray[np.float64]]:
    """Per-point test error ``e``, raw spread ``s2``, mean residual and count (any leading shape)."""
    B = np.asarray(n, dtype=np.float64)
    with np.errstate(invalid="ignore", divide="ignore"):
        e = mean**2 + m2 / B
    s2 = np.divide(m2, B - 1, out=np.full_like(m2, np.nan), where=B > 1)
    return {"e": e, "s2": s2, "mean": mean, "B": B}


def _split_se(loss: NDArray[np.float64], n: NDArray[np.int64]) -> float:
    """Standard error from split-level scores: s(score_j) / sqrt(J), ddof 1."""
    ok = n > 0
    if ok.sum() < 2:
        return float("nan")
    scores = loss[ok] / n[ok]
    return float(np.std(scores, ddof=1) / np.sqrt(ok.sum()))


def _pass_se(
    loss: NDArray[np.float64], n: NDArray[np.int64], replicate_of: NDArray[np.intp]
) -> float:
    """Fold-level SE of one K-fold pass, root-mean-square over the passes (METHODS.md §4).

    Each pass ``g`` gives ``s(CV_gk) / sqrt(K_g)``; repeating passes does not shrink this, because
    the passes share the same data (what repeating removes is only the partition's own noise).
    """
    se2 = []
    for g in np.unique(replicate_of):
        rows = replicate_of == g
        se = _split_se(loss[rows], n[rows])
        if np.isfinite(se):
            se2.append(se**2)
    return float(np.sqrt(np.mean(se2))) if se2 else float("nan")


def _corrected_se(
    loss: NDArray[np.float64], n: NDArray[np.int64], train_size: float, test_size: float
) -> float:
    """Nadeau & Bengio (2003) corrected SE of the mean of J random-split scores (METHODS.md §4)."""
    ok = n > 0
    J = int(ok.sum())
    if J < 2:
        return float("nan")
    scores = loss[ok] / n[ok]
    return float(np.sqrt((1.0 / J + test_size / train_size) * np.var(scores, ddof=1)))


_SE_TEXT = {
    "bootstrap": "point level: s(e_i) / sqrt(n) over the per-point out-of-bag errors",
    "simulation": "Monte-Carlo: s(error of each simulated training set) / sqrt(number of sets)",
    "pass": (
        "fold level within each K-fold pass, s(CV_k) / sqrt(K), root-mean-square over passes "
        "(repeats do not shrink it)"
    ),
    "corrected": "Nadeau & Bengio (2003) corrected: sqrt((1/J + n_test/n_train) s^2(split scores))",
}


def _se_kind(layout: SplitLayout) -> str:
    """Which standard error a plan's ``test_mse_se`` is: a key of ``_SE_TEXT``."""
    if layout.kind in ("bootstrap", "simulation"):
        return layout.kind
    if layout.partition and layout.replicate_of is not None:
        return "pass"
    return "corrected"


def standard_error_text(layout: SplitLayout) -> str:
    """One line: which standard error ``test_mse_se`` is for this plan (and the rule uses).

    Examples
    --------
    >>> from complexity.plans import SplitLayout
    >>> standard_error_text(SplitLayout("bootstrap", 30, 30.0, 11.0, True, False))[:11]
    'point level'
    """
    return _SE_TEXT[_se_kind(layout)]


def _test_error_se(
    acc: PointAccumulator, c: int, e: NDArray[np.float64], layout: SplitLayout
) -> float:
    """The standard error of ``test_mse`` that the one-standard-error rule uses (see the notes)."""
    loss, n = acc.resample_loss[:, c], acc.resample_n[:, c]
    kind = _se_kind(layout)
    if kind == "simulation":
        return _split_se(loss, n)
    if kind == "bootstrap":
        return float(np.std(e, ddof=1) / np.sqrt(e.size)) if e.size > 1 else float("nan")
    if kind == "pass":
        assert layout.replicate_of is not None
        return _pass_se(loss, n, layout.replicate_of)
    return _corrected_se(loss, n, layout.train_size, layout.test_size)


def _out_of_sample_leverage(h: NDArray[np.float64]) -> NDArray[np.float64]:
    """``h / (1 - h)``: variance of the fit without row i at x_i, in units of sigma² (METHODS §1)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        q = h / (1.0 - h)
    return np.where((h < 1.0 - 1e-10) & np.isfinite(q), q, np.inf)


def _parts(
    pp: dict[str, NDArray[np.float64]],
    q: NDArray[np.float64] | None,
    noise: float,
    layout: SplitLayout,
) -> tuple[float, float, str]:
    """Variance at the stated training size and the out-of-bag excess of one capacity.

    ``pp`` holds the per-point values of the points scored at least once; ``q`` the out-of-sample
    leverages of the full-data least-squares fit at those points (None for other ladders).
    Returns ``(variance, oob_excess, reason)``; ``reason`` says why a NaN variance is NaN.
    """
    two = pp["B"] >= 2
    s2 = pp["s2"][two]
    if layout.kind == "simulation":
        return (float(np.mean(s2)), 0.0, "") if s2.size >= 2 else (np.nan, 0.0, _ONCE)
    # Var(fbar_i): the variance, from data set to data set, of a point's average out-of-sample
    # prediction. For least squares the average is close to the fit on the other n - 1 rows,
    # whose variance given x is sigma² h_i / (1 - h_i) (Gauss-Markov, METHODS.md §1).
    spread_of_mean = None if q is None else (noise * q if noise > 0 else np.zeros_like(q))
    if spread_of_mean is not None and not np.isfinite(spread_of_mean).all():
        # the full-data fit interpolates some point (leverage 1): no closed form there
        if layout.kind != "bootstrap":
            return np.nan, 0.0, _INTERPOLATES
        return (float(np.mean(s2)) if s2.size >= 2 else np.nan), np.nan, _INTERPOLATES
    if layout.kind == "bootstrap":
        if s2.size < 2:
            return np.nan, np.nan, _ONCE
        excess = float(np.mean(s2 if spread_of_mean is None else spread_of_mean[two]))
        return float(np.mean(s2)), excess, ""
    if not layout.exchangeable:
        return np.nan, 0.0, layout.reason
    left_out = layout.n_obs - 1 - layout.train_size  # rows besides i outside i's training set
    if left_out < 0.5:  # leave-one-out: every training set of i is all the other rows
        if spread_of_mean is None:
            return np.nan, 0.0, _LOO
        return float(np.mean(spread_of_mean)), 0.0, ""
    if s2.size < 2:
        return np.nan, 0.0, _ONCE
    # delete-d jackknife (Shao & Tu 1995, §2.3): the spread over random subsets of size r of the
    # N = n - 1 other rows, times N / d, estimates the variance at training size r; exact for a
    # mean, conservative in general (Efron & Stein 1981). Law of total variance: Var(fit of size
    # r) = Var(fbar_i) + E[spread of the fits around fbar_i], so Var(fbar_i) ~ (N/d - 1) * spread.
    if spread_of_mean is None:
        return float(np.mean(s2)) * (layout.n_obs - 1) / left_out, 0.0, ""
    # least squares: Var(fbar_i) from the closed form sigma² h/(1-h), which is far steadier than
    # the jackknife at high degree (whose few wild fits there make it heavy-tailed). It leaves out
    # the part due to which x values were drawn, small beside the squared bias of a too simple fit
    return float(np.mean(s2 + spread_of_mean[two])), 0.0, ""


_ONCE = (
    "variance and bias_sq need every point predicted by at least two models; this plan predicts "
    "each point once (use CrossValidation(..., n_repeats=2) or more, or Bootstrap)"
)
_INTERPOLATES = (
    "the fit on all the data passes through some points exactly (leverage 1, as many "
    "coefficients as distinct x nearby), so the variance of their average out-of-sample "
    "prediction has no closed form"
)
_LOO = (
    "leave-one-out trains every model of a point on all the other rows, so its predictions never "
    "vary and the variance cannot be measured (use K < n folds, Bootstrap, or a least-squares "
    "ladder, whose variance has a closed form)"
)


def relation(layout: SplitLayout) -> str:
    """One sentence: how ``test_mse`` relates to the parts, and at which training size.

    Examples
    --------
    >>> from complexity.plans import SplitLayout
    >>> relation(SplitLayout("cross-validation", 50, 45.0, 5.0, True, True))[:40]
    'test_mse = noise + bias_sq + variance, a'
    """
    if layout.kind == "bootstrap":
        return (
            f"test_mse = noise + bias_sq + variance + oob_excess; the parts are for a model fitted "
            f"on all {layout.n_obs} rows, while the out-of-bag error is that of models fitted on "
            "bootstrap samples, whose extra variance is oob_excess (the known upward bias of the "
            "out-of-bag error, which the .632+ estimate corrects)."
        )
    if layout.kind == "simulation":
        return (
            f"test_mse = noise + bias_sq + variance, for training sets of {layout.train_size:g} "
            "rows drawn from the known model."
        )
    return (
        f"test_mse = noise + bias_sq + variance, all for models fitted on the plan's "
        f"{layout.train_size:.4g} training rows."
    )


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


def _no_information_errors(
    y: NDArray[np.float64] | None, fitted: NDArray[np.float64] | None
) -> NDArray[np.float64]:
    """:func:`no_information_error` of every column of ``fitted`` (the same operations)."""
    assert y is not None and fitted is not None
    cols = np.ascontiguousarray(np.asarray(fitted, dtype=np.float64).T)
    return np.var(y) + np.var(cols, axis=1) + (np.mean(y) - np.mean(cols, axis=1)) ** 2


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
    layout: SplitLayout,
    train_mse: NDArray[np.float64] | None = None,
    y: NDArray[np.float64] | None = None,
    fitted: NDArray[np.float64] | None = None,
    leverage: NDArray[np.float64] | None = None,
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
    layout : SplitLayout
        The plan's training sets (:func:`complexity.plans.split_layout`).
    train_mse : ndarray, optional
        Training error of the full-data fit per capacity (data plans).
    y, fitted : ndarray, optional
        Observed y and full-data fitted values per capacity (for the .632 estimators).
    leverage : ndarray of shape (n_capacities, n), optional
        Hat-matrix diagonals of the full-data least-squares fits (exact engine), for the
        closed-form variance of a point's average out-of-sample prediction.

    Returns
    -------
    curves : pandas.DataFrame
        ``test_mse = noise + bias_sq + variance + oob_excess`` holds exactly in every row where
        the parts are defined (see :func:`relation`).
    notes : list of str

    Examples
    --------
    >>> import numpy as np
    >>> from complexity.accumulate import PointAccumulator
    >>> from complexity.engine import Outcome
    >>> from complexity.plans import SplitLayout
    >>> acc = PointAccumulator(3, 1, 2, 2)
    >>> acc.add(Outcome(0, 0, np.array([0, 1]), np.array([[1.0], [2.0]]), np.zeros(1)))
    >>> acc.add(Outcome(1, 1, np.array([0, 1, 2]), np.array([[3.0], [2.0], [1.0]]), np.zeros(1)))
    >>> layout = SplitLayout("bootstrap", 3, 3.0, 1.0, True, False)
    >>> row = curves_table(acc, (0,), "degree", noise=0.5, layout=layout)[0].iloc[0]
    >>> bool(np.isclose(row.test_mse, row.noise + row.bias_sq + row.variance + row.oob_excess))
    True
    """
    simulated = layout.kind == "simulation"
    notes: list[str] = []
    reasons: dict[tuple[str, str], list[str]] = {}
    C = len(capacities)
    cols: dict[str, NDArray[Any]] = {
        k: np.full(C, np.nan) for k in ("train_mse", "test_mse", "test_mse_se", "bias_sq")
    }
    for k in ("bias_sq_plus_noise", "variance", "oob_excess"):
        cols[k] = np.full(C, np.nan)
    cols["noise"] = np.full(C, float(noise))
    with_632 = layout.kind == "bootstrap" and not any(v is None for v in (train_mse, y, fitted))
    if with_632:
        cols["test_mse_632"] = np.full(C, np.nan)
        cols["test_mse_632plus"] = np.full(C, np.nan)
    cols["n_scored"] = np.zeros(C, dtype=np.int64)
    cols["failed_fits"] = np.asarray(acc.failures.count[:C], dtype=np.int64).copy()
    if train_mse is not None:
        cols["train_mse"] = np.asarray(train_mse, dtype=np.float64)[:C].copy()
    else:
        with np.errstate(invalid="ignore", divide="ignore"):
            cols["train_mse"] = np.where(acc.train_n > 0, acc.train_sum / acc.train_n, np.nan)
    gamma = _no_information_errors(y, fitted) if with_632 else None
    # capacities in groups, each read as contiguous rows (capacity, point); the arithmetic is
    # elementwise or along rows, so every number equals the one-capacity-at-a-time computation
    group = max(1, _GROUP_DOUBLES // max(acc.mean.shape[0], 1))
    for start in range(0, C, group):
        part = slice(start, min(start + group, C))
        count, mean, m2 = (
            np.ascontiguousarray(a[:, part].T) for a in (acc.count, acc.mean, acc.m2)
        )
        values = _point_values(count, mean, m2)
        q_rows = None
        if leverage is not None and not simulated:
            q_rows = _out_of_sample_leverage(np.asarray(leverage[part], dtype=np.float64))
        every: NDArray[np.bool_] = np.all(count >= 1, axis=1)  # usual: no selection to copy
        full_err = np.mean(values["e"], axis=1) if values["e"].shape[1] else None
        full_se = None
        if _se_kind(layout) == "bootstrap" and values["e"].shape[1] > 1:
            full_se = np.std(values["e"], axis=1, ddof=1) / np.sqrt(values["e"].shape[1])
        for j, c in enumerate(range(part.start, part.stop)):
            pick = slice(None) if every[j] else count[j] >= 1
            pp = {k: v[j, pick] for k, v in values.items()}
            q = None if q_rows is None else q_rows[j, pick]
            n_pts = pp["e"].size
            if every[j] and full_err is not None:
                err = float(full_err[j])
            else:
                err = float(np.mean(pp["e"])) if n_pts else np.nan
            var, excess, why = _parts(pp, q, noise, layout) if n_pts else (np.nan, np.nan, _ONCE)
            if not np.isfinite(var):
                var = np.nan
            if why:
                empty = [k for k, v in (("variance", var), ("oob_excess", excess)) if np.isnan(v)]
                columns = ", ".join(empty) + " and bias_sq" if empty else "bias_sq"
                reasons.setdefault((columns, why), []).append(str(capacities[c]))
            nb2 = err - var - excess  # noise + squared bias
            cols["test_mse"][c] = noise + err if simulated else err
            if not n_pts:
                se = np.nan
            elif every[j] and full_se is not None:
                se = float(full_se[j])
            else:
                se = _test_error_se(acc, c, pp["e"], layout)
            cols["test_mse_se"][c] = se
            cols["bias_sq"][c] = nb2 if simulated else nb2 - noise
            cols["bias_sq_plus_noise"][c] = nb2 + noise if simulated else nb2
            cols["variance"][c] = var
            cols["oob_excess"][c] = excess
            if gamma is not None and train_mse is not None and np.isfinite(train_mse[c]) and n_pts:
                cols["test_mse_632"][c], cols["test_mse_632plus"][c] = bootstrap_632(
                    float(train_mse[c]), err, float(gamma[c])
                )
            cols["n_scored"][c] = n_pts
    curves = pd.DataFrame(cols, index=capacity_index(capacities, capacity_name))
    for (columns, why), where in reasons.items():
        at = "" if len(where) == len(capacities) else f" ({capacity_name} {', '.join(where)})"
        notes.append(f"{columns} are left empty{at}: {why}.")
    if not simulated and (curves["bias_sq"] < 0).any():
        neg = [str(k) for k in curves.index[curves["bias_sq"] < 0]]
        notes.append(
            f"bias_sq is negative at {capacity_name} {', '.join(neg)}: the noise estimate exceeds "
            "noise + squared bias there (noise overestimated, or too few data); the raw value is kept, "
            "read it as ~0."
        )
    return curves, notes


def replicate_errors(acc: PointAccumulator, noise: float, simulated: bool) -> NDArray[np.float64]:
    """Each replicate's own test-error curve, shape (n_replicates, C).

    A replicate is one bootstrap sample (scored out of bag), one K-fold pass, or one simulated
    training set. The selection-stability tally applies the headline rule to each of these curves
    with the headline standard errors, so every replicate picks at the same scale.

    Examples
    --------
    >>> import numpy as np
    >>> from complexity.accumulate import PointAccumulator
    >>> from complexity.engine import Outcome
    >>> acc = PointAccumulator(2, 1, 2, 2)
    >>> acc.add(Outcome(0, 0, np.array([0, 1]), np.array([[1.0], [3.0]]), np.zeros(1)))
    >>> acc.add(Outcome(1, 1, np.array([0]), np.array([[2.0]]), np.zeros(1)))
    >>> replicate_errors(acc, 0.0, False)[:, 0].tolist()
    [5.0, 4.0]
    """
    n = acc.replicate_n.astype(np.float64)
    with np.errstate(invalid="ignore", divide="ignore"):
        mse = acc.replicate_loss / n
    return mse + noise if simulated else mse
