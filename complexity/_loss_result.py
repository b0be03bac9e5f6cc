"""Sweeps under a loss other than squared error: when they apply, and their :class:`SweepResult`.

:func:`complexity.sweep` stays the one entry point. With ``loss`` other than squared error, or a
ladder whose estimator is a classifier, it hands over to
:func:`complexity._classify.classification_sweep` and wraps what comes back here, so a loss
sweep is summarised, saved and reloaded like any other. Its curves keep honest names
(``test_loss``, ``test_loss_se``, ``train_loss`` and the split columns of the loss); the
figures and the HTML report are for squared-error sweeps and say so.
"""

from __future__ import annotations

import sys
import time
from collections.abc import Callable
from typing import Any

import numpy as np
from sklearn.base import is_classifier

from ._classify import LossSweep, classification_sweep
from ._validation import _short_repr
from ._versions import installed_versions
from .ladders import Ladder
from .losses import as_loss
from .plans import Simulation
from .result import SweepResult, _failures_frame

__all__ = ["is_loss_sweep", "loss_sweep"]

#: What a loss sweep does not take, with the default that means "not asked for".
_NOT_TAKEN = {
    "noise": "auto",
    "engine": "auto",
    "keep_predictions": False,
    "sample_weight": None,
    "checkpoint": None,
    "progress": False,
}


def is_loss_sweep(ladder: Ladder, loss: Any) -> bool:
    """Whether ``sweep`` must take the loss path: a loss other than squared error, or a classifier.

    Examples
    --------
    >>> import complexity as cx
    >>> from sklearn.tree import DecisionTreeClassifier
    >>> is_loss_sweep(cx.PolynomialLadder(range(3)), "squared-error")
    False
    >>> is_loss_sweep(cx.ParamLadder(DecisionTreeClassifier(), "max_depth", [1, 2]), "squared-error")
    True
    """
    if isinstance(loss, str) and loss == "squared-error":
        estimator = getattr(ladder, "estimator", None)
        return estimator is not None and bool(is_classifier(estimator))
    return True


def loss_sweep(
    ladder: Ladder,
    X: Any,
    y: Any,
    *,
    plan: Any,
    loss: str | Callable[..., Any],
    rule: str,
    n_jobs: int | None,
    random_state: Any,
    groups: Any,
    **not_taken: Any,
) -> SweepResult:
    """Run :func:`~complexity._classify.classification_sweep` and wrap it as a SweepResult.

    ``not_taken`` holds the squared-error-only options of :func:`complexity.sweep`; any that
    was given a value other than its default is refused with the reason.

    Examples
    --------
    >>> import complexity as cx
    >>> from sklearn.datasets import load_iris
    >>> from sklearn.tree import DecisionTreeClassifier
    >>> X, y = load_iris(return_X_y=True)
    >>> ladder = cx.ParamLadder(DecisionTreeClassifier(), "max_depth", [1, 2, 3])
    >>> r = cx.sweep(ladder, X, y, plan=cx.CrossValidation(5, n_repeats=2), random_state=0)
    >>> r.metadata["loss"], list(r.curves.columns[:2])
    ('zero-one', ['test_loss', 'test_loss_se'])
    """
    started = time.perf_counter()
    if isinstance(loss, str) and loss == "squared-error":
        loss = "zero-one"  # a classifier's default: the error rate
    for name, value in not_taken.items():
        default = _NOT_TAKEN[name]
        if not (value is default or (isinstance(default, str) and value == default)):
            raise ValueError(
                f"{name}={_short_repr(value)} is for squared-error sweeps; this sweep's loss is "
                f"{_name(loss)!r}. Leave {name} at its default ({default!r})."
            )
    if isinstance(plan, Simulation):
        raise ValueError(
            "plan=Simulation(...) draws Gaussian regression responses; a sweep with "
            f"loss={_name(loss)!r} needs observed data and a data plan (Bootstrap, "
            "CrossValidation or a scikit-learn splitter)."
        )
    out = classification_sweep(
        ladder,
        X,
        y,
        plan=plan,
        loss=loss,
        rule=rule,
        random_state=random_state,
        n_jobs=n_jobs,
        groups=groups,
    )
    return _as_result(out, ladder, X, random_state, started)


def _name(loss: Any) -> str:
    return loss if isinstance(loss, str) else as_loss(loss).name


def _as_result(
    out: LossSweep, ladder: Ladder, X: Any, random_state: Any, started: float
) -> SweepResult:
    counts: dict[Any, list[Any]] = {}
    for (_, capacity), message in out.failures.items():
        entry = counts.setdefault(capacity, [0, message])
        entry[0] += 1
    failures = _failures_frame([(c, n, m) for c, (n, m) in counts.items()], ladder.capacity_name)
    Xa = np.asarray(X, dtype=np.float64)
    Xa = Xa.reshape(-1, 1) if Xa.ndim == 1 else Xa
    names = [str(c) for c in X.columns] if hasattr(X, "columns") else None
    resample_loss = out.resample_loss
    metadata = {
        "n_samples": int(Xa.shape[0]),
        "n_features": int(Xa.shape[1]),
        "feature_names": names,
        "ladder": ladder.describe(),
        "ladder_repr": repr(ladder),
        "n_resamples": 0 if resample_loss is None else len(resample_loss),
        "random_state": random_state
        if isinstance(random_state, (int, type(None)))
        else repr(random_state),
        "engine": "generic",
        "loss": out.loss.name,
        "loss_split": out.split,
        "test_loss_se": out.se_method,
        "classes": None if out.classes is None else [_plain(c) for c in out.classes],
        "stability_rule": out.rule,
        "versions": installed_versions(),
        "run_seconds": round(time.perf_counter() - started, 4),
        "x_range": [[float(a), float(b)] for a, b in zip(Xa.min(axis=0), Xa.max(axis=0))],
        "command": " ".join(sys.argv[:1]) if sys.argv and sys.argv[0] else None,
    }
    return SweepResult(
        curves=out.curves,
        recommended=out.recommended,
        rule=out.rule,
        rules=out.rules,
        stability=out.stability,
        noise=None,
        failures=failures,
        notes=list(out.notes),
        metadata=metadata,
    )


def _plain(value: Any) -> Any:
    return value.item() if isinstance(value, np.generic) else value
