"""``sweep``: run a ladder over a plan and return a :class:`~complexity.SweepResult`.

Data flows one way: validate -> build the ladder's models -> draw the resamples -> an engine
fits every capacity on every resample -> accumulators -> decomposition -> rules -> result.
"""

from __future__ import annotations

import dataclasses
import os
import sys
import time
import warnings
from collections.abc import Callable
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike

from ._contract import Engine, FullFit, Problem
from ._engine_choice import check_weight_support, choose_engine, leverage_for
from ._loss_result import is_loss_sweep, loss_sweep
from ._progress import FitCounter
from ._validation import (
    _short_repr,
    check_n_jobs,
    check_option,
    check_sample_weight,
    check_X_y,
)
from ._versions import installed_versions
from .accumulate import PointAccumulator, tallies
from .checkpoint import resume, seed_for
from .decompose import curves_table, relation, replicate_errors, standard_error_text
from .exceptions import CapacityWarning, SweepFailedError
from .ladders import Ladder
from .noise import NOT_REPLICATES, NoiseEstimate, check_against_curve, estimate_noise
from .plans import Plan, Simulation, as_plan, default_plan, split_layout
from .result import SweepResult, _failures_frame
from .rules import CRITERIA, RULES, choose, rule_table, stability

__all__ = ["CapacityWarning", "SweepFailedError", "sweep"]


def _noise_for(noise: Any, plan: Plan, X: np.ndarray | None, y: np.ndarray | None) -> NoiseEstimate:
    if isinstance(plan, Simulation):
        return NoiseEstimate(
            value=plan.noise_sd**2,
            method="given",
            df=None,
            detail=f"known noise of the simulation (noise_sd = {plan.noise_sd:.6g})",
        )
    assert X is not None and y is not None  # data plans always have data
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


@dataclasses.dataclass
class _Posed:
    """The problem a sweep poses, with what was learnt while posing it."""

    problem: Problem
    n_obs: int | None  # rows of observed data (None for a simulation without data)
    names: list[str] | None  # predictor names (DataFrame columns)
    notes: list[str]


def _check_arguments(
    ladder: Any, rule: str, n_jobs: int | None, progress: Any, keep_predictions: Any
) -> None:
    if not isinstance(ladder, Ladder):
        raise TypeError(
            "ladder must be cx.PolynomialLadder(...), cx.FeatureLadder(...) or cx.ParamLadder(...); "
            f"got {_short_repr(ladder)}."
        )
    check_option("rule", rule, RULES)
    check_n_jobs(n_jobs)
    for name, flag in (("progress", progress), ("keep_predictions", keep_predictions)):
        if not isinstance(flag, (bool, np.bool_)):
            raise TypeError(f"{name} must be True or False; got {_short_repr(flag)}.")


def _pose(
    ladder: Ladder,
    X: Any,
    y: Any,
    plan: Plan | None,
    groups: Any,
    sample_weight: Any,
    root: np.random.SeedSequence,
) -> _Posed:
    """Validate the data and build one model per capacity: the :class:`Problem` engines run."""
    if isinstance(plan, Simulation):
        n_obs = None if X is None and y is None else check_X_y(X, y).X.shape[0]
        design = plan.pilot_design(root)
        notes = ladder.check_data(design, None)
        problem = Problem(
            ladder=ladder,
            models=ladder.build(design, None),
            X=None,
            y=None,
            X_eval=plan.x_eval,
            target=plan.target,
            plan=plan,
            root=root,
            design_X=design,
        )
        return _Posed(problem, n_obs, None, notes)
    data = check_X_y(X, y, groups=groups)
    Xd, yd, names = data.X, data.y, data.feature_names
    n_obs = Xd.shape[0]
    w = check_sample_weight(sample_weight, n_obs)  # a validated copy, or None
    notes = ladder.check_data(Xd, names)
    models = ladder.build(Xd, names)
    if w is not None:
        check_weight_support(models)
    problem = Problem(
        ladder=ladder,
        models=models,
        X=Xd,
        y=yd,
        X_eval=Xd,
        target=yd,
        plan=plan if plan is not None else default_plan(n_obs),
        root=root,
        design_X=Xd,
        groups=data.groups,
        sample_weight=w,
        feature_names=tuple(str(v) for v in names) if names else None,
    )
    return _Posed(problem, n_obs, list(names) if names else None, notes)


def _accumulate(
    eng: Engine,
    engine_used: str,
    problem: Problem,
    resamples: Any,
    acc: PointAccumulator,
    *,
    n_jobs: int | None,
    progress: bool,
    checkpoint: Any,
    keep_predictions: bool,
) -> None:
    """Run the engine over every resample and fold what comes back into ``acc``."""
    C = problem.n_capacities
    counter = FitCounter(len(resamples) * C, progress)
    try:
        if checkpoint is None and not keep_predictions:
            # each block of resamples is reduced to its tally where it was fitted
            for part in eng.run_tallies(problem, resamples, n_jobs=n_jobs, on_done=counter.update):
                acc.merge(part)
            return
        if checkpoint is None:
            outcomes = eng.run(problem, resamples, n_jobs=n_jobs, on_done=counter.update)
        else:
            outcomes = resume(
                checkpoint,
                eng,
                engine_used,
                problem,
                resamples,
                n_jobs=n_jobs,
                on_done=counter.update,
            )
        n_eval = problem.X_eval.shape[0]
        for part in tallies(outcomes, eng.block_size(problem), n_eval, C, acc.keep):
            acc.merge(part)
    finally:
        counter.close()


def _decompose(
    acc: PointAccumulator,
    problem: Problem,
    full: FullFit | None,
    layout: Any,
    noise_est: NoiseEstimate,
    leverage: np.ndarray | None,
    n_obs: int | None,
) -> tuple[pd.DataFrame, NoiseEstimate, list[str]]:
    """The curves table at the noise estimate, checked against the test-error curve itself.

    A noise estimate above what the test-error curve allows (METHODS.md §7.2) is replaced by the
    curve's bound (or a residual mean square below it) and the table recomputed.
    """
    ladder = problem.ladder

    def curves_at(noise_value: float) -> tuple[pd.DataFrame, list[str]]:
        return curves_table(
            acc,
            ladder.capacities,
            ladder.capacity_name,
            noise=noise_value,
            layout=layout,
            train_mse=None if full is None else full.train_mse,
            y=problem.y,
            fitted=None if full is None else full.fitted,
            leverage=leverage,
        )

    notes: list[str] = []
    curves, table_notes = curves_at(noise_est.value)
    if not problem.simulated:
        guarded, noise_note = check_against_curve(
            noise_est, curves["test_mse"].to_numpy(), curves["test_mse_se"].to_numpy()
        )
        if guarded is not noise_est:  # replaced by the curve's bound
            diagnostics = None if full is None else full.diagnostics
            guarded, used = _residual_mean_square(
                guarded, curves, diagnostics, n_obs, ladder.capacity_name
            )
            noise_note += f" Used instead: {used}."
            curves, table_notes = curves_at(guarded.value)
        noise_est = guarded
        if noise_note:
            notes.append(noise_note)
    notes += table_notes
    if full is not None:
        notes += full.notes
        for extra in (full.criteria, full.diagnostics):
            if extra is not None:
                for col in extra.columns:
                    curves[col] = extra[col].to_numpy()
    return curves, noise_est, notes


def _failures(
    acc: PointAccumulator, full: FullFit | None, ladder: Ladder
) -> tuple[pd.DataFrame, list[str]]:
    """One row per capacity where some fit failed (resampled or full-data), and its note."""
    failed = {}
    for c in range(len(ladder.capacities)):
        count = int(acc.failures.count[c]) + (1 if full is not None and c in full.failures else 0)
        if count:
            first = acc.failures.first.get(c) or (full.failures.get(c, "") if full else "")
            failed[ladder.capacities[c]] = (count, first)
    failures = _failures_frame(
        [(cap, cnt, msg) for cap, (cnt, msg) in failed.items()], ladder.capacity_name
    )
    if not len(failures):
        return failures, []
    return failures, [
        f"{int(failures['count'].sum())} fit(s) failed at {ladder.capacity_name} "
        f"{', '.join(str(k) for k in failures.index)}; see result.failures."
    ]


def _metadata(
    posed: _Posed,
    resamples: Any,
    n_replicates: int,
    random_state: Any,
    engine_used: str,
    rule: str,
    stab_note: str,
    layout: Any,
    started: float,
) -> dict[str, Any]:
    problem = posed.problem
    root, plan, ladder, design = problem.root, problem.plan, problem.ladder, problem.design_X
    return {
        "n_samples": posed.n_obs,
        "n_features": int(problem.X_eval.shape[1]),
        "feature_names": posed.names,
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
        "versions": installed_versions(),
        "run_seconds": round(time.perf_counter() - started, 4),
        "x_range": [[float(a), float(b)] for a, b in zip(design.min(axis=0), design.max(axis=0))],
        "command": " ".join(sys.argv[:1]) if sys.argv and sys.argv[0] else None,
    }


def sweep(
    ladder: Ladder,
    X: ArrayLike | pd.DataFrame | None = None,
    y: ArrayLike | pd.Series | None = None,
    *,
    plan: Plan | int | Any | None = None,
    noise: str | float = "auto",
    rule: str = "one-se",
    n_jobs: int | None = None,
    random_state: int | np.random.SeedSequence | np.random.Generator | None = None,
    progress: bool = False,
    engine: str = "auto",
    keep_predictions: bool = False,
    groups: ArrayLike | None = None,
    sample_weight: ArrayLike | None = None,
    checkpoint: str | os.PathLike[str] | None = None,
    loss: str | Callable[..., Any] = "squared-error",
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
        Per-row weights passed to the estimator's ``fit`` (the exact engine fits weighted least
        squares with them); test and training errors are scored unweighted.
    checkpoint : str or os.PathLike, optional
        A folder where every finished resample is stored as it completes. Rerunning the same call
        after an interruption reads the finished resamples back and fits only the rest; the
        result is bit-identical to an uninterrupted run. A folder written by a different sweep
        (other data, ladder, plan, seed, engine or library version) is refused. See
        :mod:`complexity.checkpoint`.
    loss : str or callable, default="squared-error"
        What the test-error curve measures: "squared-error" (the decomposition above),
        "absolute-error", "log-loss", "brier", "zero-one", a scikit-learn scorer name or a
        scorer callable (the loss is then minus the score, lower is better). A ladder whose
        estimator is a classifier takes "zero-one" unless told otherwise. Under another loss the
        curves hold ``test_loss``, ``test_loss_se``, ``train_loss`` and the published split of
        that loss where one exists (Brier: per class; 0-1: Domingos 2000); see
        :mod:`complexity.losses`. Such sweeps use the generic engine and data plans, and take
        rule "min" or "one-se".

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
    _check_arguments(ladder, rule, n_jobs, progress, keep_predictions)
    if is_loss_sweep(ladder, loss):
        return loss_sweep(
            ladder,
            X,
            y,
            plan=as_plan(plan) if plan is not None else None,
            loss=loss,
            rule=rule,
            n_jobs=n_jobs,
            random_state=random_state,
            groups=groups,
            noise=noise,
            engine=engine,
            keep_predictions=keep_predictions,
            sample_weight=sample_weight,
            checkpoint=checkpoint,
            progress=progress,
        )
    given_plan = as_plan(plan) if plan is not None else None
    root = seed_for(checkpoint, random_state)  # resuming without a seed reuses the stored one

    # 1. pose the problem: validated data, one model per capacity, the plan
    posed = _pose(ladder, X, y, given_plan, groups, sample_weight, root)
    problem, notes = posed.problem, posed.notes
    the_plan = problem.plan
    eng, engine_used = choose_engine(engine, problem)
    noise_est = _noise_for(noise, the_plan, problem.X, problem.y)
    if NOT_REPLICATES in noise_est.detail:  # a few repeated rows: accidental ties
        notes.append(
            "some x values repeat, but too few to measure the noise as pure error (accidental "
            f"ties or duplicated records?): {noise_est.detail}."
        )

    # 2. draw the training sets
    n_eval = problem.X_eval.shape[0]
    resamples = the_plan.resamples(n_eval, root, problem.X, problem.y, problem.groups)
    # a lazy plan knows its replicate count; drawing every resample to count them costs a pass
    n_replicates = (
        getattr(resamples, "n_replicates", None) or max(r.replicate for r in resamples) + 1
    )
    inclusion_of = getattr(ladder, "inclusion", None)  # feature ladders: who was among the first k
    inclusion = inclusion_of(problem, resamples, posed.names) if callable(inclusion_of) else None

    # 3. fit: once on all the data, then every capacity on every training set
    full = None if problem.simulated else eng.fit_full(problem)
    acc = PointAccumulator(
        n_eval, problem.n_capacities, len(resamples), n_replicates, keep_predictions
    )
    _accumulate(
        eng,
        engine_used,
        problem,
        resamples,
        acc,
        n_jobs=n_jobs,
        progress=progress,
        checkpoint=checkpoint,
        keep_predictions=keep_predictions,
    )
    if acc.count.sum() == 0:
        raise _all_failed_error(acc, full, ladder.capacities)

    # 4. decompose the accumulated errors into the curves
    layout = split_layout(the_plan, resamples, n_eval)
    leverage = leverage_for(full, engine_used, problem)
    curves, noise_est, more = _decompose(
        acc, problem, full, layout, noise_est, leverage, posed.n_obs
    )
    notes += more
    failures, more = _failures(acc, full, ladder)
    notes += more

    # 5. apply the rules
    if rule in CRITERIA and rule not in curves:
        raise ValueError(
            f"rule={rule!r} needs the closed-form criteria of a least-squares ladder on the exact "
            "engine; use rule='min' or 'one-se' here."
        )
    table = rule_table(curves)
    notes += _edge_notes(table, ladder.capacities, ladder.capacity_name)
    recommended = ladder.capacities[choose(rule, curves)]
    stab, stab_note = _stability(acc, curves, rule, noise_est.value, the_plan, n_replicates)
    if stab_note:
        notes.append(stab_note)
    for note in notes:
        warnings.warn(note, CapacityWarning, stacklevel=2)

    # 6. the result
    predictions = None
    if acc.residuals is not None:
        predictions = acc.residuals + problem.target[None, :, None]
    return SweepResult(
        curves=curves,
        recommended=recommended,
        rule=rule,
        rules=table,
        stability=stab,
        noise=noise_est,
        failures=failures,
        notes=notes,
        metadata=_metadata(
            posed,
            resamples,
            n_replicates,
            random_state,
            engine_used,
            rule,
            stab_note,
            layout,
            started,
        ),
        predictions=predictions,
        coefficient_tables=None if full is None else full.coefficients,
        inclusion=inclusion,
    )
