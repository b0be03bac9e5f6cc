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

from ._validation import _short_repr

__all__ = [
    "LOSS_NAMES",
    "Loss",
    "absolute_error_points",
    "align_proba",
    "as_loss",
    "brier_points",
    "brier_split",
    "encode_labels",
    "log_loss_points",
    "main_prediction",
    "squared_error_points",
    "zero_one_points",
    "zero_one_split",
]

#: the named losses (trade names)
LOSS_NAMES = ("squared-error", "absolute-error", "log-loss", "brier", "zero-one")

_EPS = float(np.finfo(np.float64).eps)

_DESCRIPTION = {
    "squared-error": "squared error (y - f)^2",
    "absolute-error": "absolute error |y - f|",
    "log-loss": "log loss -log p(observed class), p clipped to [eps, 1 - eps]",
    "brier": "Brier score sum_k (p_k - 1[t = k])^2 over all classes",
    "zero-one": "zero-one loss 1[predicted class != observed class] (1 - accuracy)",
}
_RESPONSE = {
    "squared-error": "predict",
    "absolute-error": "predict",
    "log-loss": "predict_proba",
    "brier": "predict_proba",
    "zero-one": "predict",
}
_SPLIT = {
    "squared-error": "squared-error",
    "absolute-error": "not defined",
    "log-loss": "not defined",
    "brier": "brier",
    "zero-one": "domingos",
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
            return Loss(
                loss,
                _RESPONSE[loss],
                _SPLIT[loss],
                loss not in ("squared-error", "absolute-error"),
                _DESCRIPTION[loss],
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


def encode_labels(labels: ArrayLike, classes: NDArray[Any], *, name: str = "y") -> NDArray[np.intp]:
    """Positions of ``labels`` in the sorted class array ``classes``; unknown labels are refused.

    Examples
    --------
    >>> import numpy as np
    >>> encode_labels(["b", "a", "b"], np.array(["a", "b"])).tolist()
    [1, 0, 1]
    """
    lab = np.asarray(labels)
    pos = np.searchsorted(classes, lab)
    pos = np.clip(pos, 0, classes.size - 1)
    bad = classes[pos] != lab
    if np.any(bad):
        first = lab[np.flatnonzero(bad)[0]]
        raise ValueError(
            f"{name} holds the label {first!r}, which is not one of the classes "
            f"{classes.tolist()} found in the full data."
        )
    return pos.astype(np.intp)


def align_proba(
    proba: ArrayLike, model_classes: ArrayLike, classes: NDArray[Any]
) -> NDArray[np.float64]:
    """Put a fitted model's ``predict_proba`` columns into the full data's class order.

    Parameters
    ----------
    proba : array-like of shape (n, len(model_classes))
        Probabilities in the order of the model's ``classes_``.
    model_classes : array-like
        The fitted model's ``classes_``.
    classes : ndarray
        The full data's classes, ``numpy.unique(y)``.

    Returns
    -------
    ndarray of shape (n, len(classes))
        A class the model never saw (absent from its training set) gets probability zero.

    Examples
    --------
    A model trained without class "b":

    >>> import numpy as np
    >>> align_proba([[0.25, 0.75]], ["a", "c"], np.array(["a", "b", "c"])).tolist()
    [[0.25, 0.0, 0.75]]
    """
    p = np.asarray(proba, dtype=np.float64)
    cols = encode_labels(model_classes, classes, name="the model's classes_")
    if p.ndim != 2 or p.shape[1] != cols.size:
        raise ValueError(
            f"predict_proba returned shape {p.shape}; expected (n, {cols.size}), one column per "
            "class in the model's classes_."
        )
    out = np.zeros((p.shape[0], classes.size))
    out[:, cols] = p
    return out


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
        names = ("variance", "bias_sq_plus_noise") if truth is None else _TRUTH_KEYS
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


_TRUTH_KEYS = ("variance", "bias_sq", "noise", "expected_loss")


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
