"""``sweep``: run a ladder over a plan and return a :class:`~complexity.SweepResult`.

Data flows one way: validate -> build the ladder's models -> draw the resamples -> an engine
fits every capacity on every resample -> accumulators -> decomposition -> rules -> result.
"""

from __future__ import annotations

import dataclasses
import functools
import platform
import sys
import time
import warnings
from importlib import metadata as _md
from typing import Any

import numpy as np
import pandas as pd

from ._contract import FullFit, Problem
from ._progress import FitCounter
from ._validation import (
    _short_repr,
    check_n_jobs,
    check_option,
    check_sample_weight,
    check_X_y,
)
from .accumulate import PointAccumulator, tallies
from .checkpoint import resume, seed_for
from .decompose import curves_table, relation, replicate_errors, standard_error_text
from .engine import generic as generic_engine
from .exceptions import CapacityWarning, SweepFailedError
from .ladders import Ladder
from .noise import NOT_REPLICATES, NoiseEstimate, check_against_curve, estimate_noise
from .plans import Plan, Simulation, as_plan, default_plan, split_layout
from .result import SweepResult, _failures_frame
from .rules import CRITERIA, RULES, choose, rule_table, stability

__all__ = ["CapacityWarning", "SweepFailedError", "sweep"]

ENGINES = ("auto", "exact", "generic")


def _versions() -> dict[str, str]:
    return dict(_installed_versions())


@functools.lru_cache(maxsize=1)
def _installed_versions() -> tuple[tuple[str, str], ...]:
    """Looked up once per process: reading package metadata costs milliseconds per sweep."""
    out = {"python": platform.python_version()}
    for pkg in ("complexity", "numpy", "scipy", "scikit-learn", "pandas", "joblib"):
        try:
            out[pkg] = _md.version(pkg)
        except _md.PackageNotFoundError:
            out[pkg] = "unknown"
    return tuple(out.items())


def _linear_engine() -> Any:
    """The exact least-squares engine module, or None where it is not available."""
    try:
        from .engine import linear
    except ImportError:
        return None
    return linear if hasattr(linear, "run") and hasattr(linear, "supports") else None


def _choose_engine(engine: str, problem: Problem) -> tuple[Any, str]:
    check_option("engine", engine, ENGINES)
    linear = _linear_engine()
    fits_exact = linear is not None and linear.supports(problem)
    if engine == "exact" and not fits_exact:
        raise ValueError(
            f"engine='exact' needs a least-squares ladder (PolynomialLadder, or FeatureLadder with "
            f"the default estimator) without sample weights; got {problem.ladder!r}. "
            "Use engine='auto' or 'generic'."
        )
    if engine == "generic" or not fits_exact:
        return generic_engine, "generic"
    return linear, "exact"


def _check_weight_support(models: list[Any]) -> None:
    """Refuse sample_weight up front when a model's final step cannot take it."""
    from sklearn.utils.validation import has_fit_parameter

    for model in models:
        final = model.steps[-1][1] if hasattr(model, "steps") else model
        if not has_fit_parameter(final, "sample_weight"):
            raise TypeError(
                f"sample_weight was given, but {type(final).__name__}.fit takes no sample_weight; "
                "drop sample_weight or use an estimator whose fit accepts it."
            )


def _noise_for(noise: Any, plan: Plan, X: np.ndarray | None, y: np.ndarray | None) -> NoiseEstimate:
    if isinstance(plan, Simulation):
        return NoiseEstimate(
            value=plan.noise_sd**2,
            method="given",
            df=None,
            detail=f"known noise of the simulation (noise_sd = {plan.noise_sd:.6g})",
        )
    return estimate_noise(X, y, noise)


def _edge_notes(table: pd.DataFrame, capacities: tuple[Any, ...], name: str) -> list[str]:
    """One note per end of the ladder that a rule picks: the answer may lie beyond it."""
    if len(capacities) < 2:
        return []
    out = []
    for end, word, advice in (
        (capacities[0], "lowest", "simpler"),
        (capacities[-1], "highest", "more flexible"),
    ):
        rules = [r for r, cap in table["capacity"].items() if cap == end]
        if rules:
            out.append(
                f"{', '.join(rules)} pick(s) the {word} {name} tried ({end}): the best {name} may "
                f"lie beyond the ladder; extend it with {advice} values to check."
            )
    return out


def _residual_mean_square(
    bound: NoiseEstimate,
    curves: pd.DataFrame,
    diagnostics: pd.DataFrame | None,
    n_obs: int | None,
    capacity_name: str,
) -> tuple[NoiseEstimate, str]:
    """The fallback noise: RSS / (n - p) at the lowest test error (least squares), else the bound.

    METHODS.md §7.2: unbiased when that capacity contains the truth, too large when it is too
    simple; either way no larger than needed to keep squared bias >= 0 at a correct capacity.
    """
    best = int(np.nanargmin(curves["test_mse"].to_numpy()))
    label = f"{capacity_name} {curves.index[best]}"
    if n_obs and diagnostics is not None and np.isfinite(curves["train_mse"].iloc[best]):
        p = float(diagnostics["n_params"].iloc[best])
        if n_obs - p >= 1:
            value = float(curves["train_mse"].iloc[best]) * n_obs / (n_obs - p)
            detail = (
                f"residual mean square RSS/(n - p) of {label}, the lowest test error "
                f"(df = {n_obs - p:g}); {bound.detail}"
            )
            new = dataclasses.replace(
                bound, value=value, detail=detail, df=n_obs - p, se=value * np.sqrt(2 / (n_obs - p))
            )
            return new, f"the residual mean square of {label}, {value:.4g}"
    return bound, f"the lowest test error, {bound.value:.4g} (at {label})"


def _leverage(full: FullFit | None, engine_used: str, problem: Problem) -> np.ndarray | None:
    """Hat-matrix diagonals of the full-data least-squares fits, whichever engine ran.

    The decomposition uses them for the closed-form variance of a point's average prediction, so
    the generic engine on a least-squares ladder gets the same numbers as the exact one.
    """
    if full is None:
        return None
    if engine_used == "exact":
        return full.leverage
    linear = _linear_engine()
    if linear is None or not linear.supports(problem):
        return None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the engine's own warnings were given by its run
        return linear.fit_full(problem).leverage


def _stability(
    acc: PointAccumulator,
    curves: pd.DataFrame,
    rule: str,
    noise: float,
    plan: Plan,
    n_replicates: int,
) -> tuple[pd.Series, str]:
    """Selection stability under the headline rule, or NaN shares with the reason.

    Every replicate (bootstrap sample, K-fold pass, simulated training set) applies the headline
    rule to its own test-error curve with the headline standard errors, so its pick is made at
    the same scale as the recommendation (METHODS.md §8).
    """
    caps = tuple(curves.index)
    if rule in CRITERIA:
        note = (
            f"selection stability is not available for rule={rule!r}: closed-form criteria are "
            "computed once on all the data, with no replicate to repeat them on."
        )
    elif n_replicates < 2:
        note = (
            "selection stability needs several replicates; this plan has one (use n_repeats >= 2 "
            "or Bootstrap)."
        )
    else:
        errors = replicate_errors(acc, noise, isinstance(plan, Simulation))
        se = np.broadcast_to(curves["test_mse_se"].to_numpy(dtype=np.float64), errors.shape)
        return stability(errors, se, caps, rule), ""
    empty = stability(np.full((1, len(caps)), np.nan), np.zeros((1, len(caps))), caps, "min")
    return empty, note


def _all_failed_error(
    acc: PointAccumulator, full: FullFit | None, capacities: tuple
) -> SweepFailedError:
    messages = dict(acc.failures.first)
    if full is not None:
        for c, m in full.failures.items():
            messages.setdefault(c, m)
    first_c = min(messages) if messages else 0
    return SweepFailedError(
        f"every fit failed at every capacity; first failure (capacity {capacities[first_c]!r}): "
        f"{messages.get(first_c, 'unknown')}"
    )


def sweep(
    ladder: Ladder,
    X: Any = None,
    y: Any = None,
    *,
    plan: Any = None,
    noise: Any = "auto",
    rule: str = "one-se",
    n_jobs: int | None = None,
    random_state: Any = None,
    progress: bool = False,
    engine: str = "auto",
    keep_predictions: bool = False,
    groups: Any = None,
    sample_weight: Any = None,
    checkpoint: Any = None,
) -> SweepResult:
    """Sweep a capacity ladder over resampled training sets and recommend a capacity.

    Parameters
    ----------
    ladder : Ladder
        :class:`PolynomialLadder`, :class:`FeatureLadder` or :class:`ParamLadder`.
    X : array-like of shape (n_samples,) or (n_samples, n_features), optional
        Predictors (a DataFrame keeps its column names). May be None with a :class:`Simulation`.
    y : array-like of shape (n_samples,), optional
        Response.
    plan : Plan, scikit-learn splitter or int, optional
        Where training sets come from. An int K means ``CrossValidation(K)``. Default:
        ``CrossValidation(10, n_repeats=10)`` (:func:`complexity.plans.default_plan`; fewer
        folds for fewer than 10 rows).
    noise : "auto", "replicates", "differences", "neighbours" or float, default="auto"
        How to estimate the noise variance sigma² that separates squared bias from noise; a float
        is taken as sigma² itself (a variance, not an SD). Ignored by a Simulation (noise known).
    rule : str, default="one-se"
        The rule behind ``result.recommended``: "min", "one-se", or for least-squares ladders
        "loocv", "gcv", "aic", "aicc", "bic", "cp".
    n_jobs : int, optional
        Workers for :class:`joblib.Parallel`; results are identical for any value.
    random_state : None, int, SeedSequence or Generator
        One seed for the whole sweep; its entropy is stored so a run with None can be repeated.
    progress : bool, default=False
        Show a progress bar (counts fits) on stderr.
    engine : {"auto", "exact", "generic"}, default="auto"
        "auto" uses the exact least-squares engine where the ladder allows it.
    keep_predictions : bool, default=False
        Keep every prediction in ``result.predictions`` (memory: resamples x points x capacities).
    groups : array-like, optional
        Group labels passed to a group-aware scikit-learn splitter.
    sample_weight : array-like, optional
        Per-row weights passed to the estimator's ``fit`` (generic engine).
    checkpoint : str or os.PathLike, optional
        A folder where every finished resample is stored as it completes. Rerunning the same call
        after an interruption reads the finished resamples back and fits only the rest; the
        result is bit-identical to an uninterrupted run. A folder written by a different sweep
        (other data, ladder, plan, seed, engine or library version) is refused. See
        :mod:`complexity.checkpoint`.

    Returns
    -------
    SweepResult

    Notes
    -----
    The expected test error at a point splits into noise + squared bias + variance. Resampling
    one data set measures the variance and the sum noise + squared bias (``bias_sq_plus_noise``);
    the split of that sum needs a noise estimate (see :mod:`complexity.decompose`).

    Examples
    --------
    >>> import complexity as cx
    >>> X, y = cx.datasets.pressure_sensor()
    >>> result = cx.sweep(cx.PolynomialLadder(degrees=range(0, 7)), X, y,
    ...                   plan=cx.Bootstrap(50), random_state=0)
    >>> result.recommended in range(0, 7)
    True
    """
    started = time.perf_counter()
    if not isinstance(ladder, Ladder):
        raise TypeError(
            "ladder must be cx.PolynomialLadder(...), cx.FeatureLadder(...) or cx.ParamLadder(...); "
            f"got {_short_repr(ladder)}."
        )
    plan = as_plan(plan) if plan is not None else None
    check_option("rule", rule, RULES)
    check_n_jobs(n_jobs)
    for name, flag in (("progress", progress), ("keep_predictions", keep_predictions)):
        if not isinstance(flag, (bool, np.bool_)):
            raise TypeError(f"{name} must be True or False; got {_short_repr(flag)}.")
    root = seed_for(checkpoint, random_state)  # resuming without a seed reuses the stored one
    notes: list[str] = []

    if isinstance(plan, Simulation):
        Xd = yd = None
        n_obs = None
        if X is not None or y is not None:
            data = check_X_y(X, y)
            n_obs = data.X.shape[0]
        design = plan.pilot_design(root)
        notes += ladder.check_data(design, None)
        models = ladder.build(design, None)
        X_eval, target = plan.x_eval, plan.target
        w = None
        names = None
    else:
        data = check_X_y(X, y, groups=groups)
        Xd, yd, names = data.X, data.y, data.feature_names
        n_obs = Xd.shape[0]
        if plan is None:
            plan = default_plan(n_obs)
        w = check_sample_weight(sample_weight, n_obs)  # a validated copy, or None
        notes += ladder.check_data(Xd, names)
        models = ladder.build(Xd, names)
        X_eval, target, design = Xd, yd, Xd
        if w is not None:
            _check_weight_support(models)

    problem = Problem(
        ladder=ladder,
        models=models,
        X=Xd,
        y=yd,
        X_eval=X_eval,
        target=target,
        plan=plan,
        root=root,
        design_X=design,
        groups=data.groups if not isinstance(plan, Simulation) else None,
        sample_weight=w,
        feature_names=tuple(str(v) for v in names) if names else None,
    )
    eng, engine_used = _choose_engine(engine, problem)
    if w is not None and engine_used != "generic":  # pragma: no cover - guarded in supports()
        raise ValueError("sample_weight needs the generic engine.")
    noise_est = _noise_for(noise, plan, Xd, yd)
    if NOT_REPLICATES in noise_est.detail:  # a few repeated rows: accidental ties
        notes.append(
            "some x values repeat, but too few to measure the noise as pure error (accidental "
            f"ties or duplicated records?): {noise_est.detail}."
        )

    resamples = plan.resamples(
        X_eval.shape[0] if Xd is None else n_obs, root, Xd, yd, problem.groups
    )
    # a lazy plan knows its replicate count; drawing every resample to count them costs a pass
    n_replicates = (
        getattr(resamples, "n_replicates", None) or max(r.replicate for r in resamples) + 1
    )
    inclusion_of = getattr(ladder, "inclusion", None)  # feature ladders: who was among the first k
    inclusion = inclusion_of(problem, resamples, names) if callable(inclusion_of) else None
    C = len(ladder.capacities)
    acc = PointAccumulator(X_eval.shape[0], C, len(resamples), n_replicates, keep_predictions)

    full: FullFit | None = None
    if not isinstance(plan, Simulation):
        full = eng.fit_full(problem)

    counter = FitCounter(len(resamples) * C, progress)
    try:
        if checkpoint is None and not keep_predictions:
            # each block of resamples is reduced to its tally where it was fitted
            for part in eng.run_tallies(problem, resamples, n_jobs=n_jobs, on_done=counter.update):
                acc.merge(part)
        else:
            outcomes = (
                eng.run(problem, resamples, n_jobs=n_jobs, on_done=counter.update)
                if checkpoint is None
                else resume(
                    checkpoint,
                    eng,
                    engine_used,
                    problem,
                    resamples,
                    n_jobs=n_jobs,
                    on_done=counter.update,
                )
            )
            n_eval = X_eval.shape[0]
            for part in tallies(outcomes, eng.block_size(problem), n_eval, C, acc.keep):
                acc.merge(part)
    finally:
        counter.close()

    if acc.count.sum() == 0:
        raise _all_failed_error(acc, full, ladder.capacities)

    layout = split_layout(plan, resamples, X_eval.shape[0])
    leverage = _leverage(full, engine_used, problem)

    def curves_at(noise_value: float) -> tuple[pd.DataFrame, list[str]]:
        return curves_table(
            acc,
            ladder.capacities,
            ladder.capacity_name,
            noise=noise_value,
            layout=layout,
            train_mse=None if full is None else full.train_mse,
            y=yd,
            fitted=None if full is None else full.fitted,
            leverage=leverage,
        )

    curves, more_notes = curves_at(noise_est.value)
    if not isinstance(plan, Simulation):
        guarded, noise_note = check_against_curve(
            noise_est, curves["test_mse"].to_numpy(), curves["test_mse_se"].to_numpy()
        )
        if guarded is not noise_est:  # replaced by the curve's bound
            diagnostics = None if full is None else full.diagnostics
            guarded, used = _residual_mean_square(
                guarded, curves, diagnostics, n_obs, ladder.capacity_name
            )
            noise_note += f" Used instead: {used}."
            curves, more_notes = curves_at(guarded.value)
        noise_est = guarded
        if noise_note:
            notes.append(noise_note)
    notes += more_notes
    if full is not None:
        notes += full.notes
    if full is not None and full.criteria is not None:
        for col in full.criteria.columns:
            curves[col] = full.criteria[col].to_numpy()
    if full is not None and full.diagnostics is not None:
        for col in full.diagnostics.columns:
            curves[col] = full.diagnostics[col].to_numpy()

    failed = {}
    for c in range(C):
        count = int(acc.failures.count[c]) + (1 if full is not None and c in full.failures else 0)
        if count:
            first = acc.failures.first.get(c) or (full.failures.get(c) if full else "")
            failed[ladder.capacities[c]] = (count, first)
    failures = _failures_frame(
        [(cap, cnt, msg) for cap, (cnt, msg) in failed.items()], ladder.capacity_name
    )
    if len(failures):
        notes.append(
            f"{int(failures['count'].sum())} fit(s) failed at {ladder.capacity_name} "
            f"{', '.join(str(k) for k in failures.index)}; see result.failures."
        )

    if rule in CRITERIA and rule not in curves:
        raise ValueError(
            f"rule={rule!r} needs the closed-form criteria of a least-squares ladder on the exact "
            "engine; use rule='min' or 'one-se' here."
        )
    table = rule_table(curves)
    notes += _edge_notes(table, ladder.capacities, ladder.capacity_name)
    recommended = ladder.capacities[choose(rule, curves)]
    stab, stab_note = _stability(acc, curves, rule, noise_est.value, plan, n_replicates)
    if stab_note:
        notes.append(stab_note)
    for note in notes:
        warnings.warn(note, CapacityWarning, stacklevel=2)

    predictions = None
    if acc.residuals is not None:
        predictions = acc.residuals + target[None, :, None]

    metadata = {
        "n_samples": n_obs,
        "n_features": int(X_eval.shape[1]),
        "feature_names": list(names) if names else None,
        "ladder": ladder.describe(),
        "ladder_repr": repr(ladder),
        "plan": plan.describe(),
        "plan_repr": repr(plan),
        "n_resamples": len(resamples),
        "n_replicates": n_replicates,
        "seed_entropy": int(root.entropy) if isinstance(root.entropy, int) else str(root.entropy),
        "seed_spawn_key": list(root.spawn_key),
        "random_state": random_state
        if isinstance(random_state, (int, type(None)))
        else repr(random_state),
        "engine": engine_used,
        "stability_rule": rule,
        "stability_note": stab_note,
        "decomposition": {
            "training_size": layout.train_size,
            "relation": relation(layout),
            "test_mse_se": standard_error_text(layout),
        },
        "versions": _versions(),
        "run_seconds": round(time.perf_counter() - started, 4),
        "x_range": [[float(a), float(b)] for a, b in zip(design.min(axis=0), design.max(axis=0))],
        "command": " ".join(sys.argv[:1]) if sys.argv and sys.argv[0] else None,
    }
    return SweepResult(
        curves=curves,
        recommended=recommended,
        rule=rule,
        rules=table,
        stability=stab,
        noise=noise_est,
        failures=failures,
        notes=notes,
        metadata=metadata,
        predictions=predictions,
        coefficient_tables=None if full is None else full.coefficients,
        inclusion=inclusion,
    )
