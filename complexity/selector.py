"""``ComplexitySelector``: choose a capacity inside scikit-learn workflows.

The selector is a scikit-learn regressor, or a classifier when its ladder's estimator is one
(:func:`sklearn.base.is_classifier`), whose ``fit`` runs the whole procedure (sweep the ladder
over resampled training sets, pick a capacity by a rule, refit the model at that capacity on all
the data), so it can be the last step of a :class:`~sklearn.pipeline.Pipeline`, be assessed by an
outer :func:`~sklearn.model_selection.cross_val_score` and be tuned by
:class:`~sklearn.model_selection.GridSearchCV`, also over the ladder's and the plan's own settings
(``ladder__degrees``, ``plan__n_splits``: ladders and plans are parameter objects).

The sweep's own test error at the chosen capacity is the minimum (or near minimum) of many noisy
estimates, so it is optimistic. The honest figure for the procedure is an outer loop around the
selector (nested assessment: Varma & Simon 2006; METHODS.md §11):
``cross_val_score(ComplexitySelector(ladder), X, y, cv=outer)``.
"""

from __future__ import annotations

import numbers
import warnings
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import NDArray
from sklearn.base import BaseEstimator, RegressorMixin, is_classifier
from sklearn.metrics import accuracy_score
from sklearn.utils.metaestimators import available_if
from sklearn.utils.multiclass import check_classification_targets
from sklearn.utils.validation import check_is_fitted

from ._loss_result import is_loss_sweep
from ._validation import _short_repr, as_seed_sequence
from .engine.generic import _seed_estimator, _weight_kwargs
from .exceptions import ExtrapolationWarning
from .ladders import Ladder, PolynomialLadder
from .plans import STREAM_FULL_FIT, child_seed
from .sweep import sweep

try:  # scikit-learn >= 1.6
    from sklearn.utils.validation import validate_data as _sk_validate_data
except ImportError:  # pragma: no cover - older scikit-learn
    _sk_validate_data = None

__all__ = ["ComplexitySelector", "ExtrapolationWarning"]


def _validate(est: BaseEstimator, X: Any, y: Any = "no_validation", **kw: Any) -> Any:
    """scikit-learn's own input validation (sets n_features_in_ / feature_names_in_ on reset)."""
    if _sk_validate_data is not None:
        return _sk_validate_data(est, X, y, **kw)
    return est._validate_data(X, y, **kw)  # pragma: no cover - older scikit-learn


class _Once:
    """A flag that flips once; kept in the fitted state so repeated predictions warn once."""

    __slots__ = ("done",)

    def __init__(self) -> None:
        self.done = False

    def __getstate__(self) -> dict[str, bool]:
        return {"done": self.done}

    def __setstate__(self, state: dict[str, bool]) -> None:
        self.done = state["done"]


def _classifier_role(selector: Any) -> bool:
    """Whether the selector acts as a classifier: its ladder's estimator is one."""
    estimator = getattr(selector.ladder, "estimator", None)
    return estimator is not None and bool(is_classifier(estimator))


def _has_proba(selector: Any) -> bool:
    """``predict_proba`` exists in the classifier role when the ladder's estimator has it."""
    if not _classifier_role(selector):
        return False
    fitted = getattr(selector, "estimator_", None)
    return hasattr(fitted if fitted is not None else selector.ladder.estimator, "predict_proba")


def _loss_for(selector: Any) -> Any:
    """The loss given, or the role's default: squared error (regressor), 0-1 loss (classifier)."""
    if selector.loss is not None:
        return selector.loss
    return "zero-one" if _classifier_role(selector) else "squared-error"


def _position(capacities: tuple[Any, ...], value: Any) -> int:
    for i, c in enumerate(capacities):
        if c is value or (c is not None and value is not None and c == value):
            return i
    raise ValueError(
        f"capacity {value!r} is not on the ladder {list(capacities)}."
    )  # pragma: no cover


class ComplexitySelector(RegressorMixin, BaseEstimator):
    """A regressor or classifier that chooses its own capacity: sweep, pick by a rule, refit.

    ``fit(X, y)`` runs :func:`complexity.sweep` on the ladder and plan, takes the capacity the
    rule recommends, and fits the ladder's model at that capacity on all of ``X, y``;
    ``predict`` and ``score`` use that model.

    The role follows the ladder: when the ladder's estimator is a classifier
    (:func:`sklearn.base.is_classifier`, e.g. a :class:`~complexity.ParamLadder` over
    ``LogisticRegression``), the selector is a scikit-learn classifier. The sweep then runs
    under a classification loss (default the 0-1 loss), ``y`` holds class labels (strings kept),
    and the fitted selector has ``classes_``, ``predict`` (labels), ``predict_proba`` (when the
    estimator has it) and ``score`` = accuracy. Otherwise it is a regressor and ``score`` is
    R^2, as for any scikit-learn regressor. Every step that looks at y (ranking predictors,
    choosing the capacity) happens inside ``fit``, so an outer resampling loop around the selector
    assesses the whole procedure honestly.

    Parameters
    ----------
    ladder : Ladder
        :class:`~complexity.PolynomialLadder`, :class:`~complexity.FeatureLadder` or
        :class:`~complexity.ParamLadder`. Stored as given; the sweep never fits it in place.
    plan : Plan, scikit-learn splitter or int, optional
        Where the training sets of the sweep come from (default
        ``CrossValidation(10, n_repeats=10)``, as :func:`complexity.sweep`; an int K means
        ``CrossValidation(K)``).
    rule : str, default="one-se"
        The rule that picks the capacity: ``"min"``, ``"one-se"``, or for least-squares ladders
        on the exact engine ``"loocv"``, ``"gcv"``, ``"aic"``, ``"aicc"``, ``"bic"``, ``"cp"``.
        A sweep under a loss other than squared error takes ``"min"`` and ``"one-se"`` (the
        one-se rule uses that loss's standard error).
    loss : str or callable, optional
        The loss the sweep scores the capacities by (see :func:`complexity.sweep`):
        ``"squared-error"``, ``"absolute-error"``, ``"log-loss"``, ``"brier"``, ``"zero-one"``,
        a scikit-learn scorer name or a scorer callable. Default None means ``"squared-error"``
        for a regressor and ``"zero-one"`` (the error rate) for a classifier. A loss other than
        squared error takes no ``sample_weight`` and only the default ``noise`` and ``engine``.
    noise : "auto", "replicates", "differences", "neighbours" or float, default="auto"
        Noise-variance estimate used to split squared bias from noise in ``result_``; it does
        not affect the ``"min"`` and ``"one-se"`` rules.
    engine : {"auto", "exact", "generic"}, default="auto"
        Passed to the sweep.
    n_jobs : int, optional
        Workers for the sweep (results are identical for any value).
    random_state : None, int, SeedSequence or Generator, optional
        Seed of the sweep; with an int, refitting gives the same capacity and model.

    Attributes
    ----------
    capacity_ : object
        The chosen capacity (e.g. a degree).
    result_ : SweepResult
        The full sweep: curves, rules, stability. Its test error at ``capacity_`` is a selection
        score, optimistic as an estimate of performance; assess the selector with an outer loop.
    estimator_ : estimator
        The model at ``capacity_``, fitted on all the data.
    classes_ : ndarray of shape (n_classes,)
        Classifier role only: the class labels, in the order of ``predict_proba``'s columns.
    n_features_in_ : int
        Number of predictors seen in ``fit``.
    feature_names_in_ : ndarray of str
        Column names seen in ``fit`` (only when X was a DataFrame with string column names).
    x_range_ : ndarray of shape (n_features_in_, 2)
        Smallest and largest value of each predictor seen in ``fit``. For a polynomial ladder,
        predicting outside it raises one :class:`ExtrapolationWarning` per fitted selector.

    Examples
    --------
    >>> import complexity as cx
    >>> from sklearn.model_selection import KFold, cross_val_score
    >>> X, y = cx.datasets.pressure_sensor()
    >>> sel = cx.ComplexitySelector(cx.PolynomialLadder(range(0, 6)), plan=cx.CrossValidation(5),
    ...                             random_state=0)
    >>> sel.fit(X, y).capacity_ in range(0, 6)
    True
    >>> outer = cross_val_score(sel, X, y, cv=KFold(5, shuffle=True, random_state=1),
    ...                         scoring="neg_mean_squared_error")
    >>> len(outer)
    5

    The ladder's and the plan's own settings are nested parameters, so
    :class:`~sklearn.model_selection.GridSearchCV` can tune them:

    >>> sel.get_params()["ladder__degrees"], sel.get_params()["plan__n_splits"]
    ((0, 1, 2, 3, 4, 5), 5)
    >>> sel.set_params(ladder__degrees=range(0, 3)).ladder
    PolynomialLadder(degrees=[0, 1, 2], domain=None)

    Over a classifier's ladder the selector is a classifier (data: scikit-learn's iris):

    >>> from sklearn.base import is_classifier
    >>> from sklearn.datasets import load_iris
    >>> from sklearn.tree import DecisionTreeClassifier
    >>> Xi, yi = load_iris(return_X_y=True)
    >>> tree = cx.ComplexitySelector(
    ...     cx.ParamLadder(DecisionTreeClassifier(random_state=0), "max_depth", [1, 2, 3]),
    ...     plan=cx.CrossValidation(5), random_state=0)
    >>> is_classifier(tree)
    True
    >>> tree.fit(Xi, yi).classes_.tolist(), tree.result_.metadata["loss"]
    ([0, 1, 2], 'zero-one')
    >>> tree.predict_proba(Xi[:2]).shape, 0 <= tree.score(Xi, yi) <= 1
    ((2, 3), True)
    """

    def __init__(
        self,
        ladder: Ladder,
        *,
        plan: Any = None,
        rule: str = "one-se",
        loss: Any = None,
        noise: Any = "auto",
        engine: str = "auto",
        n_jobs: int | None = None,
        random_state: Any = None,
    ) -> None:
        self.ladder = ladder
        self.plan = plan
        self.rule = rule
        self.loss = loss
        self.noise = noise
        self.engine = engine
        self.n_jobs = n_jobs
        self.random_state = random_state

    def fit(
        self, X: Any, y: Any, groups: Any = None, sample_weight: Any = None
    ) -> ComplexitySelector:
        """Sweep the ladder, choose the capacity by ``rule``, refit it on all the data.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)
            Predictors (a DataFrame keeps its column names, also in ``result_``).
        y : array-like of shape (n_samples,)
            Response; class labels in the classifier role (numbers or strings).
        groups : array-like of shape (n_samples,), optional
            Group labels for a group-aware splitter given as ``plan`` (e.g. ``GroupKFold``).
        sample_weight : array-like of shape (n_samples,), optional
            Per-row weights for every fit (the sweep's and the final one); the estimator must
            accept ``sample_weight``, else a ``TypeError`` says so.

        Returns
        -------
        self : ComplexitySelector
        """
        if not isinstance(self.ladder, Ladder):
            raise TypeError(
                "ladder must be cx.PolynomialLadder(...), cx.FeatureLadder(...) or "
                f"cx.ParamLadder(...); got {_short_repr(self.ladder)}."
            )
        classifier = _classifier_role(self)
        if classifier:
            Xa, ya = _validate(self, X, y, dtype=np.float64, ensure_min_samples=3)
            check_classification_targets(ya)
        else:
            Xa, ya = _validate(self, X, y, dtype=np.float64, y_numeric=True, ensure_min_samples=3)
        loss = _loss_for(self)
        seed, loss_root = self._loss_seed(is_loss_sweep(self.ladder, loss))
        if sample_weight is not None:
            w = np.asarray(sample_weight)
            if w.dtype.kind in "iuf" and w.size and np.all(w == 0):
                raise ValueError(
                    "sample_weight is zero for every row; at least one weight must be positive."
                )
        names = getattr(self, "feature_names_in_", None)
        X_sweep: Any = Xa if names is None else pd.DataFrame(Xa, columns=list(names))
        self.result_ = sweep(
            self.ladder,
            X_sweep,
            ya,
            plan=self.plan,
            noise=self.noise,
            rule=self.rule,
            n_jobs=self.n_jobs,
            random_state=seed,
            engine=self.engine,
            groups=groups,
            sample_weight=sample_weight,
            loss=loss,
        )
        self.capacity_ = self.result_.recommended
        position = _position(self.ladder.capacities, self.capacity_)
        model = self.ladder.build(Xa, None if names is None else tuple(str(n) for n in names))[
            position
        ]
        # the same seed the sweep used for its full-data fit at this capacity
        meta = self.result_.metadata
        root = (
            loss_root
            if loss_root is not None
            else np.random.SeedSequence(
                meta["seed_entropy"], spawn_key=tuple(meta["seed_spawn_key"])
            )
        )
        estimator = _seed_estimator(model, child_seed(root, STREAM_FULL_FIT, position))
        if sample_weight is None:
            estimator.fit(Xa, ya)
        else:
            w = np.asarray(sample_weight, dtype=np.float64)
            estimator.fit(Xa, ya, **_weight_kwargs(estimator, w))
        self.estimator_ = estimator
        if classifier:
            self.classes_ = np.asarray(getattr(estimator, "classes_", np.unique(ya)))
        self.x_range_ = np.column_stack([Xa.min(axis=0), Xa.max(axis=0)])
        self._extrapolation_warned = _Once()
        return self

    def _loss_seed(self, loss_path: bool) -> tuple[Any, np.random.SeedSequence | None]:
        """The seed to give the sweep and, for a loss sweep, the root of its full-data fits.

        The squared-error sweep records its root in ``metadata``; a loss sweep does not, so the
        root is resolved here (an int or None is passed on as given and recorded as such; a
        SeedSequence or generator is resolved once and the sweep gets that root).
        """
        state = self.random_state
        if not loss_path:
            return state, None
        if state is None or (isinstance(state, numbers.Integral) and not isinstance(state, bool)):
            return state, as_seed_sequence(state)
        root = as_seed_sequence(state)
        return root, root

    def predict(self, X: Any) -> NDArray[Any]:
        """Predict with the model at the chosen capacity.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)

        Returns
        -------
        ndarray of shape (n_samples,)
            Floats (regressor role) or class labels from ``classes_`` (classifier role).

        Warns
        -----
        ExtrapolationWarning
            Once per fitted selector, when a polynomial ladder is asked to predict outside the
            range of the predictors seen in ``fit``.
        """
        check_is_fitted(self, "estimator_")
        Xa = _validate(self, X, dtype=np.float64, reset=False)
        if _classifier_role(self):
            return np.asarray(self.estimator_.predict(Xa)).reshape(-1)
        if isinstance(self.ladder, PolynomialLadder):
            self._guard_extrapolation(Xa)
        return np.asarray(self.estimator_.predict(Xa), dtype=np.float64).reshape(-1)

    @available_if(_has_proba)
    def predict_proba(self, X: Any) -> NDArray[np.float64]:
        """Class probabilities from the model at the chosen capacity (classifier role only).

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)

        Returns
        -------
        ndarray of shape (n_samples, n_classes)
            Column ``k`` is the probability of ``classes_[k]``.
        """
        check_is_fitted(self, "estimator_")
        Xa = _validate(self, X, dtype=np.float64, reset=False)
        return np.asarray(self.estimator_.predict_proba(Xa), dtype=np.float64)

    def score(self, X: Any, y: Any, sample_weight: Any = None) -> float:
        """Accuracy (classifier role) or R^2 (regressor role), as scikit-learn's mixins define.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)
        y : array-like of shape (n_samples,)
            True responses or class labels.
        sample_weight : array-like of shape (n_samples,), optional

        Returns
        -------
        float
            The share of correct labels (:func:`sklearn.metrics.accuracy_score`), or the
            coefficient of determination (:func:`sklearn.metrics.r2_score`).
        """
        if _classifier_role(self):
            return float(accuracy_score(y, self.predict(X), sample_weight=sample_weight))
        return float(super().score(X, y, sample_weight=sample_weight))

    @property
    def _estimator_type(self) -> str:
        # the role for scikit-learn < 1.6, whose is_classifier / is_regressor read this
        return "classifier" if _classifier_role(self) else "regressor"

    def _guard_extrapolation(self, X: NDArray[np.float64]) -> None:
        once = self._extrapolation_warned
        if once.done or X.shape[0] == 0:
            return
        lo, hi = self.x_range_[:, 0], self.x_range_[:, 1]
        slack = 1e-12 * np.maximum(hi - lo, np.abs(hi) + np.abs(lo))
        outside = (X < lo - slack) | (X > hi + slack)
        if not outside.any():
            return
        once.done = True
        col = int(np.flatnonzero(outside.any(axis=0))[0])
        names = getattr(self, "feature_names_in_", None)
        label = f"'{names[col]}'" if names is not None else f"column {col}"
        warnings.warn(
            f"{int(outside.any(axis=1).sum())} of {X.shape[0]} row(s) lie outside the fitted range "
            f"of x ({label}: [{lo[col]:.6g}, {hi[col]:.6g}]); a polynomial of degree "
            f"{self.capacity_} diverges beyond its data, so these predictions are extrapolations. "
            "(Warned once per fitted selector.)",
            ExtrapolationWarning,
            stacklevel=3,
        )

    def __sklearn_tags__(self) -> Any:
        tags = super().__sklearn_tags__()
        tags.input_tags.allow_nan = False
        if _classifier_role(self):  # a dynamic role: the ladder's estimator decides
            from sklearn.utils import ClassifierTags

            tags.estimator_type = "classifier"
            tags.classifier_tags = ClassifierTags()
            tags.regressor_tags = None
        return tags
