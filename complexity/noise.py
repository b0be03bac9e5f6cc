"""Noise variance of ``y = f(x) + eps`` estimated without knowing ``f``.

Squared bias can only be separated from noise when the noise variance ``sigma^2`` is known or
estimated. This module offers four estimators and an automatic choice among them:

* pure error from repeated rows of ``X`` (``replicate_variance``), unbiased for any ``f``;
* difference-based estimators for one ordered predictor: pseudo-residuals
  (``difference_variance``), first differences (``rice_variance``) and optimal difference
  sequences (``optimal_difference_variance``);
* nearest-neighbour differences for any number of predictors: the classical first-neighbour
  form (``neighbour_variance``) and the Gamma-test intercept over several neighbour orders
  (``neighbour_trend_variance``), which removes most of the upward bias from the trend of ``f``.

``estimate_noise`` picks one (or uses the one asked for, or a value given by the caller) and
returns a ``NoiseEstimate`` that says which estimator was used, why, and its approximate
standard error.

**Every number here is a variance.** A numeric ``noise`` passed to ``estimate_noise`` is read
as the noise VARIANCE ``sigma^2``, never as a standard deviation: pass ``0.5 ** 2`` for noise
with standard deviation 0.5.

Formulas and references: METHODS.md, section 7 (shared project notes).

This module is the front door: it holds ``NoiseEstimate``, ``estimate_noise`` with its automatic
choice and ``check_against_curve``, and re-exports the estimators, which live one concept per
private module: pure error in ``_noise_replicates``, the one-predictor difference estimators in
``_noise_differences``, the neighbour estimators in ``_noise_neighbours`` (their exact neighbour
search in ``_neighbours``) and the shared argument checks in ``_noise_inputs``.
"""

from __future__ import annotations

import math
import numbers
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ._noise_differences import (
    _gsj_with_df,
    difference_variance,
    optimal_difference_variance,
    rice_variance,
)
from ._noise_inputs import _as_design, _as_y, _check_real, _short_repr
from ._noise_neighbours import (
    _GAMMA_NEIGHBOURS,
    _gamma,
    _neighbours_with_df,
    neighbour_trend_variance,
    neighbour_variance,
)
from ._noise_replicates import _pure_error, _PureError, replicate_variance

__all__ = [
    "NoiseEstimate",
    "check_against_curve",
    "difference_variance",
    "estimate_noise",
    "neighbour_trend_variance",
    "neighbour_variance",
    "optimal_difference_variance",
    "replicate_variance",
    "rice_variance",
]


#: the words with which an estimate's ``detail`` says that repeated rows were not used as
#: replicates (too few: accidental ties); the sweep looks for them to add a note
NOT_REPLICATES = "not pure error from"

# Values of ``NoiseEstimate.method``.
_METHODS: tuple[str, ...] = ("replicates", "differences", "neighbours", "given", "curve-bound")

_NOISE_OPTIONS: tuple[str, ...] = ("auto", "replicates", "differences", "neighbours")

# Rules of noise="auto" for pure error (our choice, documented in estimate_noise).
_MIN_REPLICATE_GROUPS = 3  # groups of identical rows with at least two rows each
_MIN_REPLICATE_SHARE = 1.0 / 3.0  # share of all rows that lie in such groups
_FEW_DF = 10.0  # below this, a chosen pure-error estimate is flagged as rough in ``detail``
_PURE_DF_RATIO = 0.5  # pure error needs df >= this times the alternative's effective df


# --------------------------------------------------------------------------------------------
# Result object
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class NoiseEstimate:
    """An estimate of the noise variance ``sigma^2`` and how it was obtained.

    Attributes
    ----------
    value : float
        The estimate of ``sigma^2``: a variance (not a standard deviation), finite and >= 0.
    method : str
        One of ``"replicates"``, ``"differences"``, ``"neighbours"`` or ``"given"``.
    df : float or None
        Degrees of freedom where defined (pure error: ``n - m`` for ``n`` rows in ``m`` groups of
        identical rows), else None.
    detail : str
        One plain-English line describing the estimate and why its method was chosen.
    se : float or None, default=None
        Approximate standard error of ``value`` as an estimate of ``sigma^2``, or None (a given
        value, or an old record). It is the Gaussian-noise approximation
        ``sqrt(2 / df_eff) * value``, where ``df_eff`` is the pure-error df for replicates and,
        for the other estimators (quadratic forms ``y^T A y`` with ``tr A = 1``), the effective
        df ``1 / tr(A^2)``, since ``Var(y^T A y) = 2 sigma^4 tr(A^2)`` for Gaussian errors when
        ``f`` contributes nothing. For the Gamma-test estimator it adds the term
        ``4 sigma^2 ||A f||^2`` from the trend of ``f``, estimated by plug-in from
        ``E ||A y||^2 = ||A f||^2 + sigma^2 tr(A^2)`` (the pseudo-residuals of the other
        estimators annihilate lines or constants, so for them the term is small). It leaves
        out the bias from ``f`` and heavier tails than Gaussian.

    Examples
    --------
    >>> est = NoiseEstimate(2.0, "replicates", 3.0, "pure error from 6 rows in 3 groups (df = 3)")
    >>> est.value, est.method, est.df, est.se
    (2.0, 'replicates', 3.0, None)
    >>> NoiseEstimate.from_dict(est.to_dict()) == est
    True
    """

    value: float
    method: str
    df: float | None
    detail: str
    se: float | None = None

    def __post_init__(self) -> None:
        value = _check_real("value", self.value)
        if value < 0:
            raise ValueError(f"value must be a noise variance >= 0; got {value!r}.")
        if not isinstance(self.method, str) or self.method not in _METHODS:
            listed = ", ".join(repr(m) for m in _METHODS)
            raise ValueError(f"method must be one of {listed}; got {_short_repr(self.method)}.")
        df = self.df
        if df is not None:
            df = _check_real("df", df)
            if df < 0:
                raise ValueError(f"df must be None or a number >= 0; got {df!r}.")
        if not isinstance(self.detail, str):
            raise TypeError(f"detail must be a str; got {_short_repr(self.detail)}.")
        se = self.se
        if se is not None:
            se = _check_real("se", se)
            if se < 0:
                raise ValueError(f"se must be None or a standard error >= 0; got {se!r}.")
        object.__setattr__(self, "value", value)
        object.__setattr__(self, "df", df)
        object.__setattr__(self, "se", se)

    def to_dict(self) -> dict[str, Any]:
        """Return the fields as a JSON-friendly dict (plain floats, str and None).

        Returns
        -------
        dict
            Keys ``"value"``, ``"method"``, ``"df"``, ``"detail"`` and ``"se"``.

        Examples
        --------
        >>> NoiseEstimate(0.25, "given", None, "given by the caller").to_dict()
        {'value': 0.25, 'method': 'given', 'df': None, 'detail': 'given by the caller', 'se': None}
        """
        return {
            "value": self.value,
            "method": self.method,
            "df": self.df,
            "detail": self.detail,
            "se": self.se,
        }

    @classmethod
    def from_dict(cls, d: Mapping[str, Any]) -> NoiseEstimate:
        """Rebuild a ``NoiseEstimate`` from the output of ``to_dict``.

        Parameters
        ----------
        d : mapping
            The keys ``"value"``, ``"method"``, ``"df"`` and ``"detail"``, and optionally
            ``"se"`` (records written before ``se`` existed have no such key; it becomes None).

        Returns
        -------
        NoiseEstimate
            Equal to the object that produced ``d``.

        Examples
        --------
        >>> import json
        >>> est = NoiseEstimate(1.5, "neighbours", None, "nearest-neighbour differences")
        >>> NoiseEstimate.from_dict(json.loads(json.dumps(est.to_dict()))) == est
        True
        >>> NoiseEstimate.from_dict({"value": 1.0, "method": "given", "df": None, "detail": ""}).se
        """
        if not isinstance(d, Mapping):
            raise TypeError(
                f"d must be a mapping such as the dict returned by to_dict(); got {_short_repr(d)}."
            )
        required = {"value", "method", "df", "detail"}
        keys = set(d)
        missing = sorted(required - keys)
        extra = sorted(str(k) for k in keys - required - {"se"})
        if missing or extra:
            raise ValueError(
                "d must have the keys 'value', 'method', 'df', 'detail' and optionally 'se'; "
                f"missing {missing}, unexpected {extra}."
            )
        return cls(
            value=d["value"], method=d["method"], df=d["df"], detail=d["detail"], se=d.get("se")
        )


# --------------------------------------------------------------------------------------------
# The estimate used by a sweep
# --------------------------------------------------------------------------------------------


def estimate_noise(X: ArrayLike | None, y: ArrayLike | None, noise: Any = "auto") -> NoiseEstimate:
    """Estimate the noise variance ``sigma^2``, or wrap one given by the caller.

    Parameters
    ----------
    X : array-like of shape (n_samples, n_features) or (n_samples,)
        Predictors; a 1-D array is one predictor. Not used when ``noise`` is a number.
    y : array-like of shape (n_samples,)
        Responses. Not used when ``noise`` is a number.
    noise : {"auto", "replicates", "differences", "neighbours"} or float, default="auto"
        * ``"auto"``: the more precise of pure error and the alternative for this design (see
          Notes).
        * ``"replicates"``: pure error (``replicate_variance``).
        * ``"differences"``: the pseudo-residual estimator (``difference_variance``); one
          predictor only.
        * ``"neighbours"``: for one predictor the first-neighbour estimator
          (``neighbour_variance``); for several the Gamma-test estimator
          (``neighbour_trend_variance``).
        * a real number >= 0: **the noise VARIANCE sigma^2** (not the standard deviation),
          returned as is with ``method="given"``. For noise SD ``s`` pass ``s**2``.

        A forced method that does not apply raises a ``ValueError`` that says why.

    Returns
    -------
    NoiseEstimate
        The value, the method used, the pure-error df (replicates only), a one-line detail that
        says why the method was chosen, and the approximate standard error ``se``.

    Raises
    ------
    TypeError
        If ``noise`` is a bool or neither a str nor a real number, or if ``X``/``y`` are not
        numeric.
    ValueError
        If ``noise`` is negative, not finite or an unknown name; if the forced method does not
        apply; or if ``X``/``y`` have bad shapes or non-finite entries.

    Notes
    -----
    **The automatic choice** (our rules). The alternative to pure error is the pseudo-residual
    estimator for one predictor with at least 3 distinct values, the first-neighbour estimator
    for one predictor with fewer, and the Gamma-test estimator for several predictors. Each is a
    quadratic form ``y^T A y`` with ``tr A = 1``, so for Gaussian noise its variance is
    ``2 sigma^4 tr(A^2)``, that of a pure-error estimate on ``df_eff = 1 / tr(A^2)`` degrees of
    freedom; pure error has variance ``2 sigma^4 / df`` exactly. Pure error is chosen when all
    of these hold:

    1. it is about as precise or better: ``df >= df_eff / 2`` of the alternative (pure error
       is unbiased for any ``f`` while the alternatives are not, and ``df_eff`` counts only
       their noise, so pure error is given this head start);
    2. at least 3 groups of identical rows have two or more rows each;
    3. at least a third of all rows lie in such groups (so the repeats look planned rather than
       accidental ties in a continuous predictor).

    Otherwise the alternative is used and ``detail`` says which condition failed. If the
    alternative cannot be computed, pure error is used when ``df >= 2``. A pure-error estimate
    on fewer than 10 df is marked as rough in ``detail``, as are replicate groups whose ``y``
    are all identical (duplicated records make pure error too small).

    Examples
    --------
    >>> import numpy as np
    >>> x = np.repeat([1.0, 2.0, 3.0, 4.0], 3)  # 4 set points, 3 readings each
    >>> est = estimate_noise(x, np.array([1, 3, 2, 4, 6, 5, 7, 9, 8, 2, 4, 3.0]))
    >>> est.method, est.value, est.df
    ('replicates', 1.0, 8.0)
    >>> print(est.detail)
    pure error from 12 rows in 4 groups of identical x (df = 8; rough, fewer than 10 df), \
more precise than pseudo-residual differences (effective df ≈ 1.38) and unbiased for any f
    >>> estimate_noise(None, None, noise=0.5**2).value  # a variance: SD 0.5 -> 0.25
    0.25
    >>> rng = np.random.default_rng(0)
    >>> x = np.sort(rng.uniform(0, 1, 400))
    >>> y = np.sin(6 * x) + rng.normal(0, 0.1, 400)
    >>> est = estimate_noise(x, y)
    >>> est.method, round(est.value, 3), round(est.se, 4)
    ('differences', 0.01, 0.001)
    """
    choice = _check_noise(noise)
    if isinstance(choice, float):
        return NoiseEstimate(
            choice,
            "given",
            None,
            f"given by the caller as the noise variance sigma^2 = {choice!r} "
            f"(standard deviation {math.sqrt(choice):.6g})",
        )
    Xa = _as_design(X, "X")
    ya = _as_y(y, Xa.shape[0])
    n, p = Xa.shape
    if n < 2:
        raise ValueError(
            f"estimate_noise needs at least 2 rows to estimate the noise; got {n}. "
            "Give the noise variance as a number instead (noise=sigma**2)."
        )
    if choice == "replicates":
        pure = _pure_error(Xa, ya)
        if pure is None:
            raise ValueError(
                f"noise='replicates' needs repeated rows of X, but all {n} rows are distinct "
                "(pure-error df = 0). Use noise='auto', 'differences' or 'neighbours', or give "
                "the noise variance as a number."
            )
        return _pure_estimate(pure, "asked for by the caller")
    if choice == "differences":
        if p != 1:
            raise ValueError(
                f"noise='differences' needs exactly one predictor, but X has {p} columns. "
                "Use noise='neighbours' (or 'auto') for several predictors."
            )
        return _alternative_estimate(_differences_alt(Xa[:, 0], ya), "")
    if choice == "neighbours":
        return _alternative_estimate(_neighbours_alt(Xa, ya), "")
    # auto
    pure = _pure_error(Xa, ya)
    alt: _Alternative | None
    if p >= 2:
        alt = _neighbours_alt(Xa, ya)
    elif np.unique(Xa[:, 0]).size >= 3:
        alt = _differences_alt(Xa[:, 0], ya)
    elif pure is not None and pure.df >= 2:
        alt = None  # two distinct x: only first neighbours remain, and pure error exists
    else:
        alt = _neighbours_alt(Xa, ya)
    if pure is None:
        assert alt is not None
        return _alternative_estimate(alt, "")
    if alt is None:
        return _pure_estimate(pure, "fewer than 3 distinct x, so no difference estimator")
    reasons = []
    if pure.df < _PURE_DF_RATIO * alt.df_eff:
        reasons.append(f"df = {pure.df:g} < half the effective df ≈ {alt.df_eff:.3g} of {alt.name}")
    if pure.groups < _MIN_REPLICATE_GROUPS:
        reasons.append(
            f"only {pure.groups} group{'s' if pure.groups != 1 else ''} of repeated x "
            f"(need {_MIN_REPLICATE_GROUPS})"
        )
    if pure.rows < _MIN_REPLICATE_SHARE * n:
        reasons.append(f"only {pure.rows} of {n} rows repeated (need a third)")
    if not reasons:
        better = "more precise than" if pure.df >= alt.df_eff else "nearly as precise as"
        return _pure_estimate(
            pure, f"{better} {alt.name} (effective df ≈ {alt.df_eff:.3g}) and unbiased for any f"
        )
    why = f"; {NOT_REPLICATES} {pure.rows} repeated rows: " + ", ".join(reasons)
    return _alternative_estimate(alt, why)


def check_against_curve(
    estimate: NoiseEstimate,
    test_error: ArrayLike,
    se: ArrayLike,
) -> tuple[NoiseEstimate, str]:
    """Keep a noise estimate only if the sweep's test-error curve does not contradict it.

    Test error is noise + squared bias + variance, so it is never below the noise. An estimate
    above the lowest test error by more than one standard error of the two (combined) is
    contradicted by the data: it is replaced by that lowest test error, an upper bound on the
    noise (method ``"curve-bound"``; for least-squares ladders the sweep then uses the residual
    mean square of that capacity, METHODS.md §7.2). A noise variance given by the caller is never
    replaced; the note then only warns.

    Parameters
    ----------
    estimate : NoiseEstimate
        The estimate used so far.
    test_error : array-like of shape (n_capacities,)
        ``test_mse`` per capacity (NaN where undefined).
    se : array-like of shape (n_capacities,)
        Its standard error per capacity.

    Returns
    -------
    estimate : NoiseEstimate
        The estimate to use (the same object when consistent).
    note : str
        Empty when consistent; else one line that gives both values and the reason.

    Examples
    --------
    >>> est = NoiseEstimate(5.0, "neighbours", None, "nearest-neighbour differences", se=0.5)
    >>> new, note = check_against_curve(est, [9.0, 2.0, 2.2], [0.3, 0.2, 0.2])
    >>> new.value, new.method
    (2.0, 'curve-bound')
    >>> check_against_curve(est, [9.0, 5.1, 5.3], [0.3, 0.2, 0.2])[1]
    ''
    """
    err = np.asarray(test_error, dtype=np.float64)
    s = np.asarray(se, dtype=np.float64)
    finite = np.isfinite(err)
    if not finite.any():
        return estimate, ""
    k = int(np.flatnonzero(finite)[np.argmin(err[finite])])
    low = float(err[k])
    low_se = float(s[k]) if np.isfinite(s[k]) else 0.0
    own_se = float(estimate.se) if estimate.se is not None and np.isfinite(estimate.se) else 0.0
    if estimate.value - low <= math.hypot(low_se, own_se):
        return estimate, ""
    if estimate.method == "given":
        return estimate, (
            f"the given noise variance {estimate.value:.4g} exceeds the lowest test error "
            f"({low:.4g}, SE {low_se:.2g}) by more than one standard error; it is kept because it "
            "was given, but the data contradict it."
        )
    note = (
        f"the {estimate.method} noise estimate {estimate.value:.4g} (SE {own_se:.2g}) exceeds the "
        f"lowest test error ({low:.4g}, SE {low_se:.2g}) by more than one standard error, and test "
        "error is never below the noise, so the data contradict it (it assumes a smoothness "
        "that these data lack)."
    )
    replaced = NoiseEstimate(
        max(low, 0.0),
        "curve-bound",
        None,
        f"upper bound from the curve; replaces the {estimate.method} estimate "
        f"{estimate.value:.6g} ({estimate.detail})",
        se=low_se,
    )
    return replaced, note


# --------------------------------------------------------------------------------------------
# Private: the automatic choice (inputs already validated)
# --------------------------------------------------------------------------------------------


def _check_noise(noise: Any) -> str | float:
    accepted = (
        "'auto', 'replicates', 'differences', 'neighbours', or the noise VARIANCE sigma^2 as a "
        "real number >= 0 (not the standard deviation)"
    )
    if isinstance(noise, str):
        if noise not in _NOISE_OPTIONS:
            raise ValueError(f"noise must be {accepted}; got {_short_repr(noise)}.")
        return noise
    if isinstance(noise, bool | np.bool_):
        raise TypeError(f"noise must be {accepted}; got {noise!r}, a bool.")
    if not isinstance(noise, numbers.Real):
        raise TypeError(
            f"noise must be {accepted}; got {_short_repr(noise)} of type {type(noise).__name__}."
        )
    value = float(noise)
    if not math.isfinite(value) or value < 0:
        raise ValueError(f"noise must be {accepted}; got {noise!r}.")
    return value


@dataclass(frozen=True)
class _Alternative:
    """A difference or neighbour estimate with its effective df and description."""

    method: str
    name: str
    value: float
    df_eff: float
    se: float
    text: str


def _pure_estimate(pure: _PureError, why: str) -> NoiseEstimate:
    notes = ""
    if pure.df < _FEW_DF:
        notes += f"; rough, fewer than {_FEW_DF:g} df"
    if pure.flat:
        notes += f"; {pure.flat} of the groups have identical y (duplicated records?)"
    return NoiseEstimate(
        pure.value,
        "replicates",
        pure.df,
        f"pure error from {pure.rows} rows in {pure.groups} groups of identical x "
        f"(df = {pure.df:g}{notes}), {why}",
        se=pure.value * math.sqrt(2.0 / pure.df),
    )


def _alternative_estimate(alt: _Alternative, why: str) -> NoiseEstimate:
    return NoiseEstimate(alt.value, alt.method, None, alt.text + why, se=alt.se)


def _differences_alt(x: NDArray[np.float64], y: NDArray[np.float64]) -> _Alternative:
    value, df_eff = _gsj_with_df(x, y)
    n_distinct = np.unique(x).size
    ties = "" if n_distinct == x.size else f"; tied x averaged, {x.size} rows"
    return _Alternative(
        "differences",
        "pseudo-residual differences",
        value,
        df_eff,
        value * math.sqrt(2.0 / df_eff),
        f"Gasser-Sroka-Jennen-Steinmetz pseudo-residuals over {n_distinct} distinct sorted "
        f"x values{ties} (effective df ≈ {df_eff:.3g})",
    )


def _neighbours_alt(X: NDArray[np.float64], y: NDArray[np.float64]) -> _Alternative:
    n, p = X.shape
    if p == 1:
        value, df_eff = _neighbours_with_df(X, y)
        return _Alternative(
            "neighbours",
            "first-neighbour differences",
            value,
            df_eff,
            value * math.sqrt(2.0 / df_eff),
            f"nearest-neighbour differences over {n} rows, 1 column scaled to unit SD "
            f"(effective df ≈ {df_eff:.3g})",
        )
    value, df_eff, k, clipped, se = _gamma(X, y, _GAMMA_NEIGHBOURS)
    if clipped:
        # a negative intercept carries no information on sigma² (too few rows for the dimension,
        # or a rough f): the classical first-neighbour estimate, biased upward, is the stated
        # fallback; the sweep's curve check then bounds it from above
        first, df1 = _neighbours_with_df(X, y)
        return _Alternative(
            "neighbours",
            "first-neighbour differences",
            first,
            df1,
            first * math.sqrt(2.0 / df1),
            f"nearest-neighbour differences over {n} rows, {p} columns scaled to unit SD "
            f"(effective df ≈ {df1:.3g}); the Gamma-test intercept was negative, so its "
            "trend correction was not used",
        )
    note = ""
    return _Alternative(
        "neighbours",
        "Gamma-test neighbour differences",
        value,
        df_eff,
        se,
        f"Gamma-test intercept of neighbour differences over k = 1..{k} neighbours, {n} rows, "
        f"{p} columns scaled to unit SD (effective df ≈ {df_eff:.3g}){note}",
    )
