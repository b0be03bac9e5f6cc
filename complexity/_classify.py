"""A capacity sweep under any loss of :mod:`complexity.losses`, for classifiers and regressors.

Data flows one way: validate (class order fixed from the full data) -> one model per capacity ->
the plan's resamples -> joblib fits, a chunk of resamples per task, returned in submission order
-> streaming per-point tallies -> curves -> rules -> stability. Results do not depend on
``n_jobs``: every fit is seeded from the sweep's root seed and the resample and capacity
positions (``plans.child_seed(root, STREAM_ESTIMATOR, resample, capacity)``, as the generic
engine does), and tallies are added in resample order.

Tallies kept per capacity (never a resamples x points x capacities array): per-point loss sums
and counts; per-resample loss sums and counts; for the zero-one loss the per-point votes for each
class (n_points x n_classes); for the Brier score the per-point sum and sum of squares of each
class probability (n_points x n_classes).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike, NDArray
from sklearn.base import is_classifier

from . import losses as L
from ._labels import capacity_index
from ._validation import _short_repr, as_seed_sequence, check_n_jobs, check_X, check_y
from .engine._dispatch import chunk_length, map_chunks, slices
from .engine.generic import _message, _random_state_keys, _seed_estimator
from .ladders import Ladder
from .plans import (
    STREAM_ESTIMATOR,
    STREAM_FULL_FIT,
    Plan,
    Resample,
    Simulation,
    SplitLayout,
    as_plan,
    child_seed,
    default_plan,
    split_layout,
)
from .rules import choose, rule_table, stability

__all__ = ["LossSweep", "classification_sweep", "rule_curves"]

_RULES = ("min", "one-se")


@dataclass(frozen=True)
class LossSweep:
    """The outcome of :func:`classification_sweep`.

    Attributes
    ----------
    curves : pandas.DataFrame
        Indexed by capacity. Always: ``test_loss`` (mean over the scored points of each point's
        mean out-of-sample loss; for a scorer, the mean of minus the score over resamples),
        ``test_loss_se`` (the standard error the one-standard-error rule uses, see
        ``se_method``), ``train_loss`` (the loss of the fit on all the data, on all the data) and
        ``n_scored`` (points scored at least once). Split columns by loss:

        - zero-one (Domingos 2000): ``bias`` (share of points whose main prediction, the mode
          over training sets, is not the optimal class), ``variance`` (mean P(prediction !=
          main prediction)), ``variance_unbiased`` (mean variance where bias is 0),
          ``variance_biased`` (mean variance where bias is 1), ``net_variance`` (mean c2 V; for
          two classes unbiased minus biased variance), ``noise`` (mean of 1 - the share of the
          most frequent label among rows with the same x) and ``noise_term`` (the loss against
          the observed labels minus the loss against the optimal class). When the noise is not
          estimated (x not replicated), the optimal class is the observed label, so ``bias``
          includes the noise, and ``noise``/``noise_term`` are NaN.
        - brier: ``bias_sq_plus_noise`` and ``variance`` (summed over classes; the observed label
          cannot separate squared bias from noise).
        - log loss, absolute error, squared error, scorers: no split columns (see ``split``).

        The split uses the points predicted by at least two training sets; with K-fold the
        training sets overlap, so variance there is the spread across the plan's training sets.
    recommended : object
        The capacity the rule picks.
    rule : str
    rules : pandas.DataFrame
        Every resampling rule's pick and reason (:func:`complexity.rules.rule_table`).
    stability : pandas.Series
        Share of replicates whose own test-loss curve leads the rule to each capacity.
    classes : ndarray or None
        The class order (``numpy.unique(y)`` of the full data), None for regression.
    loss : complexity.losses.Loss
    split : str
        Which split the curves carry, or why there is none, in words.
    se_method : str
        Which standard error ``test_loss_se`` is.
    notes : list of str
    resample_loss : pandas.DataFrame
        Mean loss of each resample (rows, in plan order) at each capacity (columns).
    failures : dict
        ``(resample index, capacity) -> message`` for fits that failed.

    Examples
    --------
    >>> import complexity as cx
    >>> from sklearn.datasets import load_iris
    >>> from sklearn.tree import DecisionTreeClassifier
    >>> X, y = load_iris(return_X_y=True)
    >>> ladder = cx.ParamLadder(DecisionTreeClassifier(), "max_depth", [1, 2, 3])
    >>> out = classification_sweep(ladder, X, y, plan=cx.CrossValidation(5, 2), random_state=0)
    >>> out.curves.index.tolist(), out.classes.tolist()
    ([1, 2, 3], [0, 1, 2])
    """

    curves: pd.DataFrame
    recommended: Any
    rule: str
    rules: pd.DataFrame
    stability: pd.Series
    classes: NDArray[Any] | None
    loss: L.Loss
    split: str
    se_method: str
    notes: list[str] = field(default_factory=list)
    resample_loss: pd.DataFrame | None = None
    failures: dict[tuple[int, Any], str] = field(default_factory=dict)


def rule_curves(curves: pd.DataFrame) -> pd.DataFrame:
    """The view :mod:`complexity.rules` reads: ``test_loss``/``test_loss_se`` as ``test_mse``/_se.

    The rules only compare values and standard errors, so they apply to any lower-is-better
    loss; the curves themselves keep honest names.

    Examples
    --------
    >>> import pandas as pd
    >>> c = pd.DataFrame({"test_loss": [0.3, 0.2], "test_loss_se": [0.05, 0.05]})
    >>> rule_curves(c).columns.tolist()
    ['test_mse', 'test_mse_se']
    """
    return pd.DataFrame(
        {"test_mse": curves["test_loss"], "test_mse_se": curves["test_loss_se"]},
        index=curves.index,
    )


@dataclass(frozen=True)
class _Data:
    X: NDArray[np.float64]
    y: NDArray[Any]  # labels as given (classification) or floats (regression)
    codes: NDArray[np.intp] | None  # class positions, classification only
    classes: NDArray[Any] | None
    names: tuple[str, ...] | None


def _check_data(
    Xa: NDArray[np.float64], names: tuple[str, ...] | None, y: Any, classification: bool
) -> _Data:
    if classification:
        ya, classes, codes = L.check_labels(y, Xa.shape[0])
        return _Data(Xa, ya, codes, classes, names)
    yf = check_y(y)
    if yf.shape[0] != Xa.shape[0]:
        raise ValueError(
            f"X and y have different lengths: X has {Xa.shape[0]} rows, y has {yf.shape[0]} values."
        )
    return _Data(Xa, yf, None, None, names)


def _check_loss_fits(loss: L.Loss, models: list[Any]) -> bool:
    """Whether the models are classifiers; refuse a loss that does not fit them."""
    kinds = {bool(is_classifier(m)) for m in models}
    if len(kinds) > 1:
        raise ValueError(
            "the ladder mixes classifiers and regressors across its capacities (e.g. a feature "
            "count of 0 gives a mean-only regressor); use capacities of one kind."
        )
    clf = kinds.pop()
    if loss.classification is True and not clf:
        raise ValueError(
            f"loss={loss.name!r} scores class labels, but the ladder's estimator "
            f"{type(models[0]).__name__} is not a classifier; use loss='squared-error' or "
            "'absolute-error'."
        )
    if loss.classification is False and clf:
        raise ValueError(
            f"loss={loss.name!r} is a regression loss, but the ladder's estimator "
            f"{type(models[0]).__name__} is a classifier; use 'zero-one', 'log-loss' or 'brier'."
        )
    if loss.response == "predict_proba" and not all(hasattr(m, "predict_proba") for m in models):
        raise ValueError(
            f"loss={loss.name!r} needs predicted probabilities, but "
            f"{type(models[0]).__name__} has no predict_proba; use loss='zero-one'."
        )
    return bool(clf)


@dataclass(frozen=True)
class _Spec:
    """What every task needs, sent once per task."""

    models: list[Any]
    loss: L.Loss
    data: _Data
    root: np.random.SeedSequence


@dataclass
class _Fit:
    """One capacity on one resample: per-point losses, and what the split tallies need."""

    points: NDArray[np.float64] | None = None  # per-point loss at the test rows
    predicted: NDArray[np.intp] | None = None  # predicted class positions (zero-one)
    proba: NDArray[np.float64] | None = None  # probabilities in the full class order (brier)
    score_loss: float = float("nan")  # minus the scorer's score (scorers)
    failure: str = ""


def _score(
    est: Any, spec: _Spec, rows: NDArray[np.intp]
) -> tuple[NDArray[np.float64] | None, NDArray[np.intp] | None, NDArray[np.float64] | None, float]:
    """Loss of a fitted model at ``rows``: (per-point losses, predicted codes, probabilities, scorer loss)."""
    d, loss = spec.data, spec.loss
    Xr = d.X[rows]
    if loss.response == "scorer":
        assert loss.scorer is not None
        return None, None, None, -float(loss.scorer(est, Xr, d.y[rows]))
    if loss.response == "predict_proba":
        assert d.classes is not None and d.codes is not None
        proba = L.align_proba(est.predict_proba(Xr), est.classes_, d.classes)
        if loss.name == "brier":  # the split needs the probabilities themselves
            return L.brier_points(d.codes[rows], proba), None, proba, float("nan")
        return L.log_loss_points(d.codes[rows], proba), None, None, float("nan")
    pred = np.asarray(est.predict(Xr)).reshape(-1)
    if pred.shape[0] != rows.size:
        raise ValueError(f"predict returned {pred.shape[0]} values for {rows.size} rows")
    if d.codes is not None:
        assert d.classes is not None
        codes = L.encode_labels(pred, d.classes, name="predict's output")
        return L.zero_one_points(d.codes[rows], codes), codes, None, float("nan")
    regression = L.squared_error_points if loss.name == "squared-error" else L.absolute_error_points
    return regression(d.y[rows], pred), None, None, float("nan")


_Outcome = tuple[int, int, NDArray[np.intp], list[_Fit]]  # index, replicate, test rows, fits


def _fit_resample(spec: _Spec, r: Resample, keys: list[list[str]], ladder: Ladder) -> _Outcome:
    d = spec.data
    assert r.train is not None
    X_tr, y_tr = d.X[r.train], d.y[r.train]
    fits = []
    for c, model in enumerate(spec.models):
        reason = ladder.training_shortfall(c, X_tr)
        if reason is not None:
            fits.append(_Fit(failure=reason))
            continue
        try:
            est = _seed_estimator(
                model, child_seed(spec.root, STREAM_ESTIMATOR, r.index, c), keys[c]
            )
            est.fit(X_tr, y_tr)
            points, predicted, proba, score_loss = _score(est, spec, r.test)
            if points is not None and not np.all(np.isfinite(points)):
                raise FloatingPointError("the fitted model gave NaN or infinite losses")
            fits.append(_Fit(points, predicted, proba, score_loss))
        except Exception as exc:  # a failing fit is recorded, the sweep goes on
            fits.append(_Fit(failure=_message(exc)))
    return r.index, r.replicate, r.test, fits


def _fit_chunk(spec: _Spec, ladder: Ladder, chunk: Sequence[Resample]) -> list[_Outcome]:
    keys = [_random_state_keys(m) for m in spec.models]  # once per chunk, not per fit
    return [_fit_resample(spec, r, keys, ladder) for r in chunk]


class _Tallies:
    """Running sums over resamples; added to in resample order only."""

    def __init__(self, n: int, C: int, R: int, K: int, loss: L.Loss) -> None:
        self.loss_sum = np.zeros((n, C))
        self.count = np.zeros((n, C), dtype=np.int64)
        self.resample_sum = np.full((R, C), np.nan)
        self.resample_n = np.zeros((R, C), dtype=np.int64)
        self.votes = np.zeros((C, n, K), dtype=np.int64) if loss.split == "domingos" else None
        brier = loss.split == "brier"
        self.p_sum = np.zeros((C, n, K)) if brier else None
        self.p_sq = np.zeros((C, n, K)) if brier else None
        self.failures: dict[tuple[int, int], str] = {}
        self.replicate_of = np.zeros(R, dtype=np.intp)

    def add(self, index: int, test: NDArray[np.intp], fits: list[_Fit]) -> None:
        for c, f in enumerate(fits):
            if f.failure:
                self.failures[(index, c)] = f.failure
                continue
            if f.points is None:  # scorer: one value per resample
                self.resample_sum[index, c] = f.score_loss
                self.resample_n[index, c] = 1
                np.add.at(self.count[:, c], test, 1)
                continue
            np.add.at(self.loss_sum[:, c], test, f.points)
            np.add.at(self.count[:, c], test, 1)
            self.resample_sum[index, c] = float(f.points.sum())
            self.resample_n[index, c] = test.size
            if self.votes is not None and f.predicted is not None:
                np.add.at(self.votes[c], (test, f.predicted), 1)
            if self.p_sum is not None and self.p_sq is not None and f.proba is not None:
                np.add.at(self.p_sum[c], test, f.proba)
                np.add.at(self.p_sq[c], test, f.proba**2)


def _split_se(scores: NDArray[np.float64]) -> float:
    return float(np.std(scores, ddof=1) / np.sqrt(scores.size)) if scores.size >= 2 else np.nan


def _se(
    kind: str,
    per_point: NDArray[np.float64],
    scores: NDArray[np.float64],
    replicate_of: NDArray[np.intp],
    train_size: float,
    test_size: float,
) -> float:
    """The SE of ``test_loss`` for one capacity, chosen by plan kind as the regression path does.

    ``kind`` is "bootstrap" (point level, s(e_i)/sqrt(n')), "pass" (fold level within each
    K-fold pass, root-mean-square over passes) or "corrected" (Nadeau & Bengio 2003).
    ``scores`` are the per-resample mean losses (NaN where the fit failed).
    """
    ok = np.isfinite(scores)
    if kind == "bootstrap" and per_point.size:
        return _split_se(per_point)
    if kind == "pass":
        se2 = [_split_se(scores[ok & (replicate_of == g)]) ** 2 for g in np.unique(replicate_of)]
        se2 = [s for s in se2 if np.isfinite(s)]
        return float(np.sqrt(np.mean(se2))) if se2 else float("nan")
    s = scores[ok]
    if s.size < 2:
        return float("nan")
    return float(np.sqrt((1.0 / s.size + test_size / train_size) * np.var(s, ddof=1)))


_SE_TEXT = {
    "bootstrap": "point level: s(e_i) / sqrt(n) over the per-point out-of-bag losses",
    "bootstrap-scorer": (
        "Nadeau & Bengio (2003) corrected over the bootstrap resamples' scores, "
        "n_test/n_train = 0.368 (a scorer has no per-point value)"
    ),
    "pass": (
        "fold level within each K-fold pass, s(CV_k) / sqrt(K), root-mean-square over passes "
        "(repeats do not shrink it)"
    ),
    "corrected": "Nadeau & Bengio (2003) corrected: sqrt((1/J + n_test/n_train) s^2(split scores))",
}


def _resolve_plan(plan: Any, n: int) -> Plan:
    the_plan = default_plan(n) if plan is None else as_plan(plan)
    if isinstance(the_plan, Simulation):
        raise TypeError(
            "plan=Simulation(...) draws Gaussian regression responses; it cannot drive a sweep "
            "under a classification loss. Use cx.Bootstrap, cx.CrossValidation or a scikit-learn "
            "splitter."
        )
    return the_plan


def _full_fit_losses(spec: _Spec) -> NDArray[np.float64]:
    """Training loss of every capacity fitted on all the data (NaN where the fit fails)."""
    rows = np.arange(spec.data.X.shape[0])
    out = np.full(len(spec.models), np.nan)
    for c, model in enumerate(spec.models):
        try:
            est = _seed_estimator(model, child_seed(spec.root, STREAM_FULL_FIT, c))
            est.fit(spec.data.X, spec.data.y)
            points, _, _, score_loss = _score(est, spec, rows)
        except Exception:  # reported through the resampled fits' failures
            continue
        out[c] = score_loss if points is None else float(np.mean(points))
    return out


def _run(
    spec: _Spec, ladder: Ladder, resamples: Sequence[Resample], K: int, n_jobs: int | None
) -> _Tallies:
    """Fit every capacity on every resample (joblib) and tally the losses in resample order."""
    n, C, R = spec.data.X.shape[0], len(spec.models), len(resamples)
    tallies = _Tallies(n, C, R, K, spec.loss)
    # the engines' joblib loop: chunks drawn lazily, results in submission order
    chunks = slices(resamples, chunk_length(R, n_jobs))
    for outcome in map_chunks(
        _fit_chunk, (spec, ladder), chunks, n_jobs=n_jobs, size=len
    ):  # in submission order, so the sums do not depend on n_jobs
        for index, replicate, test, fits in outcome:
            tallies.replicate_of[index] = replicate
            tallies.add(index, test, fits)
    if tallies.resample_n.sum() == 0:
        first = next(iter(tallies.failures.values()), "no fits were made")
        raise RuntimeError(f"every fit failed; the first failure: {first}")
    return tallies


def _curves(
    tallies: _Tallies,
    spec: _Spec,
    ladder: Ladder,
    layout: SplitLayout,
    optimal: tuple[NDArray[np.intp], NDArray[np.float64]] | None,
) -> tuple[pd.DataFrame, str]:
    """The curves table and the key of the standard error it carries."""
    n, codes = spec.data.X.shape[0], spec.data.codes
    scorer = spec.loss.response == "scorer"
    kind = (
        layout.kind if layout.kind == "bootstrap" else "pass" if layout.partition else "corrected"
    )
    se_key = "bootstrap-scorer" if kind == "bootstrap" and scorer else kind
    # a scorer has no per-point value: on the bootstrap its resample scores get the corrected SE
    kind_c, tr, te = (
        ("corrected", float(n), 0.368 * n)
        if se_key == "bootstrap-scorer"
        else (kind, layout.train_size, layout.test_size)
    )
    with np.errstate(invalid="ignore", divide="ignore"):
        scores = tallies.resample_sum / tallies.resample_n
    train_loss = _full_fit_losses(spec)
    rows = []
    for c in range(len(spec.models)):
        scored = tallies.count[:, c] > 0
        ok = np.isfinite(scores[:, c])
        if scorer:
            per_point = np.empty(0)
            test = float(np.mean(scores[ok, c])) if ok.any() else np.nan
        else:
            per_point = tallies.loss_sum[scored, c] / tallies.count[scored, c]
            test = float(np.mean(per_point)) if per_point.size else np.nan
        row: dict[str, float] = {
            "test_loss": test,
            "test_loss_se": _se(kind_c, per_point, scores[:, c], tallies.replicate_of, tr, te),
            "train_loss": float(train_loss[c]),
            "n_scored": float(scored.sum()),
        }
        if tallies.votes is not None:
            assert codes is not None
            row.update(L.zero_one_columns(tallies.votes[c], codes, optimal))
        if tallies.p_sum is not None and tallies.p_sq is not None:
            row.update(
                L.brier_columns(tallies.p_sum[c], tallies.p_sq[c], tallies.count[:, c], codes)
            )
        rows.append(row)
    index = capacity_index(ladder.capacities, ladder.capacity_name)
    return pd.DataFrame(rows, index=index), se_key


def _notes(tallies: _Tallies, loss: L.Loss, layout: SplitLayout, split: str) -> list[str]:
    notes = []
    if loss.split in ("not defined", "squared-error"):
        notes.append(split)
    elif (tallies.count.max(axis=0) < 2).all():
        notes.append(
            "every point was predicted by one training set only (a single K-fold pass?): the "
            "split columns are empty; repeat the folds or use the bootstrap."
        )
    elif layout.kind != "bootstrap":
        notes.append(
            "the split's variance is the spread over this plan's overlapping training sets, which "
            "understates the spread over independent data sets; the bootstrap is closer to it."
        )
    if tallies.failures:
        notes.append(
            f"{len(tallies.failures)} fit(s) failed and were left out; the first: "
            f"{next(iter(tallies.failures.values()))}"
        )
    return notes


def _replicate_stability(
    tallies: _Tallies, curves: pd.DataFrame, capacities: tuple[Any, ...], rule: str
) -> pd.Series:
    """Each replicate's own curve (its resamples' losses pooled) under the headline SEs."""
    rep = tallies.replicate_of
    G, C = int(rep.max()) + 1, len(capacities)
    rep_sum, rep_n = np.zeros((G, C)), np.zeros((G, C))
    done = np.isfinite(tallies.resample_sum)
    np.add.at(rep_sum, rep, np.where(done, tallies.resample_sum, 0.0))
    np.add.at(rep_n, rep, np.where(done, tallies.resample_n, 0))
    with np.errstate(invalid="ignore", divide="ignore"):
        rep_err = np.where(rep_n > 0, rep_sum / rep_n, np.nan)
    se_rows = np.tile(curves["test_loss_se"].to_numpy(), (G, 1))
    return stability(rep_err, se_rows, capacities, rule)


def classification_sweep(
    ladder: Ladder,
    X: ArrayLike | pd.DataFrame,
    y: ArrayLike | pd.Series,
    *,
    plan: Plan | int | Any | None = None,
    loss: str | Callable[..., Any] = "zero-one",
    rule: str = "one-se",
    random_state: int | np.random.SeedSequence | np.random.Generator | None = None,
    n_jobs: int | None = None,
    groups: ArrayLike | None = None,
) -> LossSweep:
    """Sweep a ladder's capacity under a chosen loss and recommend a capacity.

    Parameters
    ----------
    ladder : Ladder
        Typically a :class:`~complexity.ParamLadder` over a classifier (tree depth, number of
        neighbours, regularisation C); regressors work with the regression losses.
    X : array-like of shape (n_samples, n_features)
    y : array-like of shape (n_samples,)
        Class labels (strings kept as given) for a classifier; numbers for a regressor.
    plan : Plan, scikit-learn splitter or int, optional
        Default :func:`complexity.plans.default_plan`. ``Simulation`` is refused.
    loss : str or callable, default="zero-one"
        A name from :data:`complexity.losses.LOSS_NAMES`, a scikit-learn scorer name, or a
        scorer callable (the loss is then minus the score, so lower is better).
    rule : {"one-se", "min"}, default="one-se"
    random_state : int, SeedSequence, Generator or None
    n_jobs : int or None
        Workers for :class:`joblib.Parallel`; the result does not depend on it.
    groups : array-like, optional
        Passed to a group-aware splitter.

    Returns
    -------
    LossSweep

    Examples
    --------
    >>> import complexity as cx
    >>> from sklearn.datasets import load_breast_cancer
    >>> from sklearn.neighbors import KNeighborsClassifier
    >>> X, y = load_breast_cancer(return_X_y=True)
    >>> ladder = cx.ParamLadder(KNeighborsClassifier(), "n_neighbors", [50, 10, 1], simpler="high")
    >>> out = classification_sweep(ladder, X, y, plan=cx.CrossValidation(5), loss="brier",
    ...                            random_state=0)
    >>> out.curves.columns.tolist()[:3]
    ['test_loss', 'test_loss_se', 'train_loss']
    """
    the_loss = L.as_loss(loss)
    if rule not in _RULES:
        raise ValueError(
            f"rule must be one of {list(_RULES)} for a loss sweep (closed-form criteria are for "
            f"least squares); got {rule!r}."
        )
    n_jobs = check_n_jobs(n_jobs)
    root = as_seed_sequence(random_state)
    if not isinstance(ladder, Ladder):
        raise TypeError(f"ladder must be a complexity Ladder; got {_short_repr(ladder)}.")
    Xa, names = check_X(X)
    models = ladder.build(Xa, names)
    classification = _check_loss_fits(the_loss, models)
    data = _check_data(Xa, names, y, classification)
    the_plan = _resolve_plan(plan, data.X.shape[0])
    n = data.X.shape[0]
    K = 0 if data.classes is None else int(data.classes.size)
    resamples = the_plan.resamples(n, root, data.X, data.y, groups)
    spec = _Spec(models, the_loss, data, root)

    tallies = _run(spec, ladder, resamples, K, n_jobs)
    layout = split_layout(the_plan, resamples, n)
    optimal = None
    if the_loss.split == "domingos":
        assert data.codes is not None
        optimal = L.replicate_optimal(data.X, data.codes, K)
    curves, se_key = _curves(tallies, spec, ladder, layout, optimal)
    split = L.describe_split(the_loss, optimal is not None)
    notes = _notes(tallies, the_loss, layout, split)
    view = rule_curves(curves)
    pos = choose(rule, view)
    table = rule_table(view)
    stab = _replicate_stability(tallies, curves, ladder.capacities, rule)
    with np.errstate(invalid="ignore", divide="ignore"):
        scores = tallies.resample_sum / tallies.resample_n
    resample_loss = pd.DataFrame(
        scores, columns=capacity_index(ladder.capacities, ladder.capacity_name)
    )
    resample_loss.index.name = "resample"
    failures = {(i, ladder.capacities[c]): m for (i, c), m in tallies.failures.items()}
    return LossSweep(
        curves=curves,
        recommended=ladder.capacities[pos],
        rule=rule,
        rules=table,
        stability=stab,
        classes=data.classes,
        loss=the_loss,
        split=split,
        se_method=_SE_TEXT[se_key],
        notes=notes,
        resample_loss=resample_loss,
        failures=failures,
    )
