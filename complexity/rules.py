"""Selection rules and selection stability.

Every rule maps the curves to one capacity, preferring the simpler capacity on ties, and says why in
one line. The resampling rules are:

- ``"min"``: the capacity with the lowest estimated test error.
- ``"one-se"``: the simplest capacity whose test error is within one standard error of the
  minimum (the one-standard-error rule of Breiman, Friedman, Olshen & Stone, *Classification and
  Regression Trees*, 1984, §3.4.3; also Hastie, Tibshirani & Friedman, *The Elements of Statistical
  Learning*, §7.10.1 — section numbers from memory).

Least-squares ladders add closed-form criteria, each chosen by its minimum: ``"loocv"`` (PRESS,
Allen 1974), ``"gcv"`` (Craven & Wahba 1979), ``"aic"`` (Akaike 1974), ``"aicc"`` (Hurvich & Tsai
1989), ``"bic"`` (Schwarz 1978), ``"cp"`` (Mallows 1973).
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike

from ._labels import capacity_index

__all__ = ["CRITERIA", "RULES", "choose", "choose_min", "choose_one_se", "rule_table", "stability"]

RESAMPLING_RULES = ("min", "one-se")
CRITERIA = ("loocv", "gcv", "aic", "aicc", "bic", "cp")
RULES = RESAMPLING_RULES + CRITERIA

_CRITERION_TEXT = {
    "loocv": "leave-one-out error from PRESS (Allen 1974)",
    "gcv": "generalized cross-validation (Craven & Wahba 1979)",
    "aic": "AIC (Akaike 1974)",
    "aicc": "small-sample AICc (Hurvich & Tsai 1989)",
    "bic": "BIC (Schwarz 1978)",
    "cp": "Mallows' Cp (Mallows 1973)",
}


def choose_min(errors: ArrayLike) -> int:
    """Position of the smallest finite value; the first (simplest) one on ties.

    Examples
    --------
    >>> choose_min([5.0, 3.0, 2.5, 2.6, 2.7])
    2
    """
    e = np.asarray(errors, dtype=np.float64)
    finite = np.isfinite(e)
    if not finite.any():
        raise ValueError("no capacity has a finite error value to choose from.")
    return int(np.flatnonzero(finite)[np.argmin(e[finite])])


def choose_one_se(errors: ArrayLike, se: ArrayLike) -> int:
    """The one-standard-error rule: simplest position with error <= min + SE(at the minimum).

    Examples
    --------
    Worked check from METHODS.md §4: CV = (5.0, 3.0, 2.5, 2.6, 2.7), SE at the minimum 0.6, so the
    threshold is 3.1 and the rule picks position 1.

    >>> choose_one_se([5.0, 3.0, 2.5, 2.6, 2.7], [0.5, 0.5, 0.6, 0.5, 0.5])
    1
    """
    e = np.asarray(errors, dtype=np.float64)
    s = np.asarray(se, dtype=np.float64)
    best = choose_min(e)
    margin = s[best] if np.isfinite(s[best]) else 0.0
    threshold = e[best] + margin
    within = np.flatnonzero(np.isfinite(e) & (e <= threshold))
    return int(within[0])


def choose(rule: str, curves: pd.DataFrame) -> int:
    """Apply ``rule`` to a curves table; return the chosen row position."""
    if rule == "min":
        return choose_min(curves["test_mse"].to_numpy())
    if rule == "one-se":
        return choose_one_se(curves["test_mse"].to_numpy(), curves["test_mse_se"].to_numpy())
    if rule in CRITERIA:
        if rule not in curves:
            raise ValueError(
                f"rule={rule!r} needs the closed-form criteria of a least-squares ladder; "
                "this sweep has none. Use 'min' or 'one-se'."
            )
        return choose_min(curves[rule].to_numpy())
    raise ValueError(f"rule must be one of {list(RULES)}; got {rule!r}.")


def _fmt(x: float) -> str:
    return f"{x:.4g}"


def _reason(rule: str, curves: pd.DataFrame, pos: int) -> str:
    name = curves.index.name or "capacity"
    caps = curves.index
    if rule == "min":
        return (
            f"lowest estimated test error ({_fmt(curves['test_mse'].iloc[pos])}) of the "
            f"{len(caps)} {name} values tried"
        )
    if rule == "one-se":
        best = choose_min(curves["test_mse"].to_numpy())
        e, s = curves["test_mse"].iloc[best], curves["test_mse_se"].iloc[best]
        return (
            f"simplest {name} with test error {_fmt(curves['test_mse'].iloc[pos])} <= "
            f"{_fmt(e)} + {_fmt(s)} (minimum at {name} {caps[best]} plus one standard error; "
            "Breiman et al. 1984)"
        )
    return f"lowest {_CRITERION_TEXT[rule]}: {_fmt(curves[rule].iloc[pos])}; no resampling"


def rule_table(curves: pd.DataFrame) -> pd.DataFrame:
    """One row per rule that applies: the capacity it picks and a one-line reason.

    Examples
    --------
    >>> import pandas as pd
    >>> curves = pd.DataFrame({"test_mse": [5.0, 3.0, 2.5], "test_mse_se": [0.5, 0.5, 0.6]},
    ...                       index=pd.Index([0, 1, 2], name="degree"))
    >>> rule_table(curves)["capacity"].tolist()
    [2, 1]
    """
    rows = []
    for rule in RULES:
        if rule in CRITERIA and rule not in curves:
            continue
        try:
            pos = choose(rule, curves)
        except ValueError:
            continue
        rows.append(
            {"rule": rule, "capacity": curves.index[pos], "reason": _reason(rule, curves, pos)}
        )
    return pd.DataFrame(rows, columns=["rule", "capacity", "reason"]).set_index("rule")


def stability(
    errors: np.ndarray, se: np.ndarray, capacities: tuple[Any, ...], rule: str
) -> pd.Series:
    """Share of replicates in which each capacity would have been chosen.

    Parameters
    ----------
    errors, se : ndarray of shape (n_replicates, n_capacities)
        Each replicate's own test-error curve and its standard error.
    capacities : tuple
    rule : {"min", "one-se"}
        Criteria rules have no per-replicate curve; for them stability is that of "min".

    Notes
    -----
    METHODS.md §8 (after Breiman 1996b; from memory): pi_k = #{b : k_b = k} / B. It measures how
    sensitive the rule is to resampling, not the probability that k is right.

    Examples
    --------
    >>> import numpy as np
    >>> err = np.array([[3.0, 1.0, 2.0], [3.0, 2.0, 1.0]])
    >>> stability(err, np.zeros_like(err), (0, 1, 2), "min").tolist()
    [0.0, 0.5, 0.5]
    """
    errors = np.asarray(errors, dtype=np.float64)
    se = np.asarray(se, dtype=np.float64)
    rows = np.isfinite(errors).any(axis=1)
    e = np.where(np.isfinite(errors[rows]), errors[rows], np.inf)
    best = np.argmin(e, axis=1)  # first minimum: the simplest on ties, as choose_min
    if rule == "one-se":
        at_best = np.take_along_axis(se[rows], best[:, None], axis=1)
        margin = np.where(np.isfinite(at_best), at_best, 0.0)
        threshold = np.take_along_axis(e, best[:, None], axis=1) + margin
        pos = np.argmax(e <= threshold, axis=1)  # first capacity within the threshold
    else:
        pos = best
    wins = np.bincount(pos, minlength=len(capacities)).astype(np.float64)
    used = int(rows.sum())
    share = wins / used if used else np.full(len(capacities), np.nan)
    return pd.Series(share, index=capacity_index(capacities), name="share_chosen")
