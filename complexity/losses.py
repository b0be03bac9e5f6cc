"""Losses for the test-error curve and the bias–variance split each one has in the literature.

Every loss is lower-is-better and is scored point by point, so a sweep can average it over the
evaluation points and keep running per-point tallies. The losses, by trade name:

- ``"squared-error"``: ``(y - f)^2`` (regression; the default of :func:`complexity.sweep`, whose
  split into noise, squared bias and variance lives in :mod:`complexity.decompose`).
- ``"absolute-error"``: ``|y - f|`` (regression); test error only here.
- ``"log-loss"``: ``-log p(t)``, the predicted probability of the observed class ``t`` clipped to
  ``[eps, 1 - eps]`` with ``eps`` the float64 machine epsilon (as scikit-learn's ``log_loss``).
  No bias–variance split is implemented for it: the columns say "not defined".
- ``"brier"``: ``sum_k (p_k - 1[t = k])^2`` over all classes (Brier 1950). For two classes it is
  twice scikit-learn's binary ``brier_score_loss``, which scores the positive class only.
- ``"zero-one"``: ``1[prediction != t]`` (misclassification rate; 1 - accuracy).

A scikit-learn scorer (a name accepted by :func:`sklearn.metrics.get_scorer`, or a callable
``scorer(estimator, X, y)``) is accepted too. Scorers are higher-is-better, so the loss is
**minus the score** (``"accuracy"`` gives ``-accuracy``, ``"neg_log_loss"`` gives the log loss).
A scorer scores a whole test set at once, so it has no per-point value and no split.

Splits (pure functions on tallies of predictions, with the meaning of every column):

- :func:`brier_split`: the squared-error decomposition applied to each class's probability and
  summed over classes.
- :func:`zero_one_split`: Domingos (2000), "A unified bias-variance decomposition and its
  applications", ICML 2000 (title from memory): main prediction, bias, unbiased, biased and net
  variance.

Class order is fixed once from the full data (``numpy.unique(y)``, labels kept as given);
:func:`align_proba` maps a fitted model's ``classes_`` into that order, with zero probability
for a class the model never saw, so a class missing from a training set never shifts columns.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ._class_labels import align_proba, check_labels, encode_labels
from ._validation import _short_repr, row_groups

__all__ = [
    "LOSS_NAMES",
    "Loss",
    "absolute_error_points",
    "align_proba",
    "as_loss",
    "brier_columns",
    "brier_points",
    "brier_split",
    "check_labels",
    "describe_split",
    "encode_labels",
    "log_loss_points",
    "main_prediction",
    "replicate_optimal",
    "squared_error_points",
    "zero_one_columns",
    "zero_one_points",
    "zero_one_split",
]

#: the named losses (trade names)
LOSS_NAMES = ("squared-error", "absolute-error", "log-loss", "brier", "zero-one")

_EPS = float(np.finfo(np.float64).eps)
_TRUTH = ("variance", "bias_sq", "noise", "expected_loss")

#: name -> (what the model is asked for, the split that applies, description)
_NAMED = {
    "squared-error": ("predict", "squared-error", "squared error (y - f)^2"),
    "absolute-error": ("predict", "not defined", "absolute error |y - f|"),
    "log-loss": (
        "predict_proba",
        "not defined",
        "log loss -log p(observed class), p clipped to [eps, 1 - eps]",
    ),
    "brier": ("predict_proba", "brier", "Brier score sum_k (p_k - 1[t = k])^2 over all classes"),
    "zero-one": (
        "predict",
        "domingos",
        "zero-one loss 1[predicted class != observed class] (1 - accuracy)",
    ),
}


@dataclass(frozen=True)
class Loss:
    """A lower-is-better loss, as resolved by :func:`as_loss`.

    Attributes
    ----------
    name : str
        A trade name from :data:`LOSS_NAMES`, or the scorer's name (``"scorer:<name>"``).
    response : {"predict", "predict_proba", "scorer"}
        What the fitted model is asked for.
    split : {"squared-error", "brier", "domingos", "not defined"}
        The published bias–variance split that applies.
    classification : bool or None
        True for losses on class labels, False for regression losses, None for a scorer
        (either kind).
    description : str
        One line, in words.
    scorer : callable or None
        The scikit-learn scorer ``scorer(estimator, X, y)`` (higher is better), for a scorer loss.

    Examples
    --------
    >>> as_loss("zero-one").split
    'domingos'
    >>> as_loss("neg_log_loss").response
    'scorer'
    """

    name: str
    response: str
    split: str
    classification: bool | None
    description: str
    scorer: Callable[..., Any] | None = None


def as_loss(loss: str | Callable[..., Any] | Loss) -> Loss:
    """Resolve a loss name, a scikit-learn scorer name or a scorer callable into a :class:`Loss`.

    Parameters
    ----------
    loss : str, callable or Loss
        One of :data:`LOSS_NAMES`; or a name :func:`sklearn.metrics.get_scorer` accepts (e.g.
        ``"accuracy"``, ``"neg_log_loss"``, ``"roc_auc"``); or a callable
        ``scorer(estimator, X, y) -> float``, higher is better. For a scorer the loss is minus
        the score, so that lower is better as for every other loss.

    Returns
    -------
    Loss

    Examples
    --------
    >>> as_loss("brier").description
    'Brier score sum_k (p_k - 1[t = k])^2 over all classes'
    >>> as_loss("accuracy").name
    'scorer:accuracy'
    """
    if isinstance(loss, Loss):
        return loss
    if isinstance(loss, str):
        if loss in LOSS_NAMES:
            response, split, text = _NAMED[loss]
            return Loss(
                loss, response, split, loss not in ("squared-error", "absolute-error"), text
            )
        from sklearn.metrics import get_scorer, get_scorer_names

        if loss in get_scorer_names():
            return Loss(
                f"scorer:{loss}",
                "scorer",
                "not defined",
                None,
                f"minus the scikit-learn score {loss!r} (scores are higher-is-better)",
                get_scorer(loss),
            )
        raise ValueError(
            f"loss={loss!r} is neither a loss name {list(LOSS_NAMES)} nor a scikit-learn scorer "
            "name (see sklearn.metrics.get_scorer_names())."
        )
    if callable(loss):
        name = getattr(loss, "__name__", type(loss).__name__)
        return Loss(
            f"scorer:{name}",
            "scorer",
            "not defined",
            None,
            f"minus the score of the callable {name} (scores are higher-is-better)",
            loss,
        )
    raise TypeError(
        f"loss must be one of {list(LOSS_NAMES)}, a scikit-learn scorer name or a callable "
        f"scorer(estimator, X, y); got {_short_repr(loss)}."
    )


def zero_one_points(codes: ArrayLike, predicted: ArrayLike) -> NDArray[np.float64]:
    """Per-point zero-one loss ``1[predicted != observed]`` (both as class positions).

    Examples
    --------
    >>> zero_one_points([0, 1, 2], [0, 2, 2]).tolist()
    [0.0, 1.0, 0.0]
    """
    return (np.asarray(codes) != np.asarray(predicted)).astype(np.float64)


def log_loss_points(codes: ArrayLike, proba: ArrayLike) -> NDArray[np.float64]:
    """Per-point log loss ``-log p(observed class)``, p clipped to ``[eps, 1 - eps]``.

    The clipping is scikit-learn's (``sklearn.metrics.log_loss``, float64 machine epsilon), so
    averages agree with it; the rows are not renormalised.

    Examples
    --------
    >>> import numpy as np
    >>> np.round(log_loss_points([1], [[0.5, 0.5]]), 6).tolist()
    [0.693147]
    """
    p = np.asarray(proba, dtype=np.float64)
    c = np.asarray(codes, dtype=np.intp)
    picked = np.clip(p[np.arange(c.size), c], _EPS, 1.0 - _EPS)
    return -np.log(picked)


def brier_points(codes: ArrayLike, proba: ArrayLike) -> NDArray[np.float64]:
    """Per-point Brier score ``sum_k (p_k - 1[t = k])^2`` over all classes (Brier 1950).

    Examples
    --------
    >>> brier_points([0], [[0.75, 0.25]]).tolist()
    [0.125]
    """
    p = np.asarray(proba, dtype=np.float64)
    c = np.asarray(codes, dtype=np.intp)
    onehot = np.zeros_like(p)
    onehot[np.arange(c.size), c] = 1.0
    return np.sum((p - onehot) ** 2, axis=1)


def main_prediction(votes: ArrayLike) -> NDArray[np.intp]:
    """Domingos's main prediction under zero-one loss: the mode of the predicted classes.

    ``votes[i, k]`` counts the training sets whose model predicted class k at point i. Ties go
    to the first class in the class order.

    Examples
    --------
    >>> main_prediction([[1, 2, 0], [2, 2, 1]]).tolist()
    [1, 0]
    """
    return np.argmax(np.asarray(votes), axis=1).astype(np.intp)


def zero_one_split(votes: ArrayLike, optimal: ArrayLike) -> dict[str, float]:
    """Domingos (2000) bias–variance split of the zero-one loss, averaged over points.

    At point x with predictions y over training sets, main prediction y_m (the mode) and optimal
    prediction y* (the Bayes class; on data, the observed label when the noise is not
    estimated)::

        B(x) = 1[y_m != y*]                 bias
        V(x) = P(y != y_m)                  variance (over training sets)
        c2(x) = 1 if B(x) = 0 else -P(y = y* | y != y_m)

    and ``E[1[y != y*]] = B(x) + c2(x) V(x)`` exactly at every point (Domingos 2000, the
    zero-one loss theorem; for two classes c2 = -1 on biased points).

    Parameters
    ----------
    votes : array-like of shape (n_points, n_classes)
        Number of training sets whose model predicted each class at each point. Points with no
        votes are skipped.
    optimal : array-like of int, shape (n_points,)
        The optimal class y* of each point, as a class position.

    Returns
    -------
    dict
        Means over the points with votes:

        - ``loss``: ``P(y != y*)``, the expected zero-one loss against the optimal prediction;
        - ``bias``: share of points whose main prediction is not the optimal one;
        - ``variance``: mean V(x);
        - ``variance_unbiased``: mean of ``(1 - B) V``, variance where the main prediction is
          right (it adds to the loss);
        - ``variance_biased``: mean of ``B V``, variance where the main prediction is wrong
          (for two classes it takes away from the loss);
        - ``net_variance``: mean of ``c2 V``; for two classes ``variance_unbiased -
          variance_biased`` (Domingos's net variance), so ``loss = bias + net_variance``.
        - ``n_points``: number of points with votes.

    Examples
    --------
    One point, predictions (a, a, b) over three training sets, optimal class b: main
    prediction a, so bias 1, variance 1/3, net variance -1/3 and loss 2/3.

    >>> s = zero_one_split([[2, 1]], [1])
    >>> s["bias"], round(s["variance"], 4), round(s["net_variance"], 4), round(s["loss"], 4)
    (1.0, 0.3333, -0.3333, 0.6667)
    """
    v = np.asarray(votes, dtype=np.float64)
    opt = np.asarray(optimal, dtype=np.intp)
    total = v.sum(axis=1)
    keep = total > 0
    v, opt, total = v[keep], opt[keep], total[keep]
    if v.shape[0] == 0:
        nan = float("nan")
        keys = ("loss", "bias", "variance", "variance_unbiased", "variance_biased", "net_variance")
        return {**dict.fromkeys(keys, nan), "n_points": 0.0}
    rows = np.arange(v.shape[0])
    main = main_prediction(v)
    share_main = v[rows, main] / total
    share_opt = v[rows, opt] / total
    bias = (main != opt).astype(np.float64)
    variance = 1.0 - share_main
    with np.errstate(invalid="ignore", divide="ignore"):
        towards_optimal = np.where(variance > 0, share_opt / variance, 0.0)
    c2 = np.where(bias == 0, 1.0, -towards_optimal)
    return {
        "loss": float(np.mean(1.0 - share_opt)),
        "bias": float(np.mean(bias)),
        "variance": float(np.mean(variance)),
        "variance_unbiased": float(np.mean((1.0 - bias) * variance)),
        "variance_biased": float(np.mean(bias * variance)),
        "net_variance": float(np.mean(c2 * variance)),
        "n_points": float(v.shape[0]),
    }


def brier_split(
    mean: ArrayLike,
    m2: ArrayLike,
    count: ArrayLike,
    *,
    codes: ArrayLike | None = None,
    truth: ArrayLike | None = None,
) -> dict[str, float]:
    """The squared-error split of the Brier score, per class and summed over classes.

    For class k at point x, the predicted probability p_k varies over training sets (mean
    ``pbar_k``, variance ``Var p_k``) and the outcome is ``o_k = 1[t = k]`` with true probability
    ``pi_k``. The squared-error decomposition of each class, summed::

        E sum_k (p_k - o_k)^2 = sum_k (E p_k - pi_k)^2 + sum_k Var p_k + sum_k pi_k (1 - pi_k)
                              =        bias_sq       +    variance    +       noise

    From B >= 2 predictions at a point, ``s_k^2`` (ddof 1) estimates ``Var p_k`` without bias and
    ``(pbar_k - pi_k)^2 - s_k^2 / B`` estimates the squared bias without bias.

    Parameters
    ----------
    mean, m2 : array-like of shape (n_points, n_classes)
        Mean and sum of squared deviations of each class probability over the B predictions.
    count : array-like of shape (n_points,)
        B, the number of predictions at each point. Points with B < 2 are skipped.
    codes : array-like of int, optional
        The observed class of each point (on data). Gives ``bias_sq_plus_noise`` (the outcome is
        one label, so squared bias and noise cannot be told apart).
    truth : array-like of shape (n_points, n_classes), optional
        The true class probabilities (known truth). Gives ``bias_sq`` and ``noise`` apart.

    Returns
    -------
    dict
        Means over the points with B >= 2: ``variance`` and, with ``codes``,
        ``bias_sq_plus_noise`` (``test error - variance``; it equals the Brier score of the
        points' out-of-sample predictions minus ``variance`` exactly), or with ``truth``,
        ``bias_sq``, ``noise`` and ``expected_loss`` (their sum with ``variance``); also
        ``n_points``.

    Examples
    --------
    Two predictions (0.6, 0.8) of class 1 at a point whose true probabilities are (0.3, 0.7):
    s^2 per class is 0.02, so variance = 0.04; bias_sq = 2 * ((0.7 - 0.7)^2 - 0.02 / 2) = -0.02
    (an unbiased estimate of zero may be negative); noise = 2 * 0.3 * 0.7 = 0.42.

    >>> import numpy as np
    >>> s = brier_split([[0.3, 0.7]], [[0.02, 0.02]], [2], truth=[[0.3, 0.7]])
    >>> round(s["variance"], 6), round(s["bias_sq"], 6), round(s["noise"], 6)
    (0.04, -0.02, 0.42)
    """
    if (codes is None) == (truth is None):
        raise ValueError("brier_split needs exactly one of codes (observed) or truth (known).")
    mu = np.asarray(mean, dtype=np.float64)
    ss = np.asarray(m2, dtype=np.float64)
    B = np.asarray(count, dtype=np.float64)
    keep = B >= 2
    out: dict[str, float] = {"n_points": float(keep.sum())}
    if not keep.any():
        names = ("variance", "bias_sq_plus_noise") if truth is None else _TRUTH
        return {**dict.fromkeys(names, float("nan")), **out}
    mu, ss, B = mu[keep], ss[keep], B[keep]
    s2 = ss / (B[:, None] - 1.0)
    variance = s2.sum(axis=1)
    if truth is None:
        assert codes is not None
        target = np.zeros_like(mu)
        c = np.asarray(codes, dtype=np.intp)[keep]
        target[np.arange(c.size), c] = 1.0
    else:
        target = np.asarray(truth, dtype=np.float64)[keep]
    bias_sq = np.sum((mu - target) ** 2 - s2 / B[:, None], axis=1)
    out["variance"] = float(np.mean(variance))
    if truth is None:
        out["bias_sq_plus_noise"] = float(np.mean(bias_sq))
    else:
        noise = np.sum(target * (1.0 - target), axis=1)
        out["bias_sq"] = float(np.mean(bias_sq))
        out["noise"] = float(np.mean(noise))
        out["expected_loss"] = out["bias_sq"] + out["variance"] + out["noise"]
    return out


def squared_error_points(y: ArrayLike, pred: ArrayLike) -> NDArray[np.float64]:
    """Per-point squared error ``(y - f)^2``.

    Examples
    --------
    >>> squared_error_points([1.0, 2.0], [0.5, 2.0]).tolist()
    [0.25, 0.0]
    """
    return (np.asarray(pred, dtype=np.float64) - np.asarray(y, dtype=np.float64)) ** 2


def absolute_error_points(y: ArrayLike, pred: ArrayLike) -> NDArray[np.float64]:
    """Per-point absolute error ``|y - f|``.

    Examples
    --------
    >>> absolute_error_points([1.0, 2.0], [0.5, 2.5]).tolist()
    [0.5, 0.5]
    """
    return np.abs(np.asarray(pred, dtype=np.float64) - np.asarray(y, dtype=np.float64))


def replicate_optimal(
    X: NDArray[np.float64], codes: NDArray[np.intp], K: int
) -> tuple[NDArray[np.intp], NDArray[np.float64]] | None:
    """Per row: the majority class among rows with the same x, and the noise 1 - its share.

    Domingos's optimal prediction and noise N(x) = P(t != y*), estimated from replicated x. Only
    when every x occurs at least twice (else None: the noise is not estimated). Ties go to the
    first class in the class order.

    Examples
    --------
    >>> import numpy as np
    >>> best, noise = replicate_optimal(np.array([[0.], [0.], [0.], [1.], [1.]]),
    ...                                 np.array([0, 1, 1, 0, 0]), 2)
    >>> best.tolist(), np.round(noise, 3).tolist()
    ([1, 1, 1, 0, 0], [0.333, 0.333, 0.333, 0.0, 0.0])
    """
    labels, sizes = row_groups(X)
    if sizes.min() < 2:
        return None
    table = np.zeros((sizes.size, K), dtype=np.int64)
    np.add.at(table, (labels, codes), 1)
    majority = np.argmax(table, axis=1)  # ties: the first class in the class order
    noise = 1.0 - table.max(axis=1) / sizes
    return majority[labels].astype(np.intp), noise[labels]


_ZERO_ONE_COLUMNS = (
    "bias",
    "variance",
    "variance_unbiased",
    "variance_biased",
    "net_variance",
    "noise",
    "noise_term",
)


def zero_one_columns(
    votes: NDArray[np.int64],
    codes: NDArray[np.intp],
    optimal: tuple[NDArray[np.intp], NDArray[np.float64]] | None,
) -> dict[str, float]:
    """The zero-one split columns of one capacity, over the points with >= 2 predictions.

    ``optimal`` is :func:`replicate_optimal`'s output, or None (noise not estimated: the optimal
    class is the observed label, ``noise`` and ``noise_term`` are NaN). ``noise_term`` is the
    loss against the observed labels minus the loss against the optimal class, so ``bias +
    net_variance + noise_term`` is the test loss of those points.

    Examples
    --------
    >>> import numpy as np
    >>> cols = zero_one_columns(np.array([[3, 1], [1, 3]]), np.array([0, 0]), None)
    >>> cols["bias"], cols["net_variance"]
    (0.5, 0.0)
    """
    keep = votes.sum(axis=1) >= 2
    if not keep.any():
        return dict.fromkeys(_ZERO_ONE_COLUMNS, np.nan)
    v = votes[keep]
    observed = zero_one_split(v, codes[keep])
    if optimal is None:
        parts = observed
        noise = noise_term = np.nan
    else:
        parts = zero_one_split(v, optimal[0][keep])
        noise = float(np.mean(optimal[1][keep]))
        noise_term = observed["loss"] - parts["loss"]
    out = {k: parts[k] for k in _ZERO_ONE_COLUMNS[:5]}
    return {**out, "noise": noise, "noise_term": noise_term}


def brier_columns(
    p_sum: NDArray[np.float64], p_sq: NDArray[np.float64], count: NDArray[np.int64], codes: Any
) -> dict[str, float]:
    """The Brier split columns on data, from per-point sums and sums of squares of probabilities.

    Examples
    --------
    >>> import numpy as np
    >>> p = np.array([[[0.5, 0.5]], [[0.7, 0.3]]])  # two predictions at one point
    >>> cols = brier_columns(p.sum(axis=0), (p**2).sum(axis=0), np.array([2]), np.array([0]))
    >>> round(cols["variance"], 6)
    0.04
    """
    B = count.astype(np.float64)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = p_sum / B[:, None]
    m2 = np.maximum(p_sq - p_sum * mean, 0.0)
    s = brier_split(np.nan_to_num(mean), m2, B, codes=codes)
    return {"bias_sq_plus_noise": s["bias_sq_plus_noise"], "variance": s["variance"]}


def describe_split(loss: Loss, optimal_known: bool) -> str:
    """One line: which split a sweep under ``loss`` reports, or that none is defined.

    Examples
    --------
    >>> describe_split(as_loss("log-loss"), False).endswith("only the test error is reported")
    True
    """
    if loss.split == "domingos":
        noise = (
            "noise estimated from rows sharing the same x (optimal class = majority label there)"
            if optimal_known
            else "noise not estimated (x is not replicated): the optimal class is taken to be the "
            "observed label, so bias includes the noise"
        )
        return (
            "zero-one loss split of Domingos (2000): main prediction = mode over training sets, "
            "bias = 1[main != optimal], variance = P(prediction != main), net variance = "
            f"unbiased - biased variance (c2-weighted for more than two classes); {noise}"
        )
    if loss.split == "brier":
        return (
            "Brier score split: the squared-error decomposition per class, summed; on data the "
            "observed label gives bias_sq_plus_noise and variance only"
        )
    if loss.split == "squared-error":
        return (
            "squared error: the split into noise, squared bias and variance is made by "
            "complexity.sweep; only the test error is reported here"
        )
    return f"{loss.description}: bias-variance split not defined; only the test error is reported"
