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
"""

from __future__ import annotations

import functools
import math
import numbers
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any, TypeVar

import numpy as np
import scipy.sparse as sp
from numpy.typing import ArrayLike, NDArray
from scipy.spatial import cKDTree

from ._validation import row_groups

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

_T = TypeVar("_T")

#: the words with which an estimate's ``detail`` says that repeated rows were not used as
#: replicates (too few: accidental ties); the sweep looks for them to add a note
NOT_REPLICATES = "not pure error from"

# Values of ``NoiseEstimate.method``.
_METHODS: tuple[str, ...] = ("replicates", "differences", "neighbours", "given", "curve-bound")

_NOISE_OPTIONS: tuple[str, ...] = ("auto", "replicates", "differences", "neighbours")

# Optimal difference sequences of Hall, Kay & Titterington (1990): sum d = 0, sum d^2 = 1 and
# every lag-l autocorrelation rho_l = -1/(2m). Order 2 is the closed form
# ((1 + sqrt 5)/4, -1/2, (1 - sqrt 5)/4); order 3 was solved numerically from those conditions,
# starting from the tabled values 0.1942, 0.2809, 0.3832, -0.8582 (METHODS.md 7.5).
_HKT_WEIGHTS: dict[int, tuple[float, ...]] = {
    1: (math.sqrt(0.5), -math.sqrt(0.5)),
    2: ((1.0 + math.sqrt(5.0)) / 4.0, -0.5, (1.0 - math.sqrt(5.0)) / 4.0),
    3: (0.19419532489953853, 0.28089215633162196, 0.3831549442900873, -0.8582424255212477),
}

# Two neighbour distances within this relative gap count as a tie (broken by lowest index).
_TIE_RTOL = 1e-9

# Neighbour orders k = 1..K regressed in the Gamma test (our default; METHODS.md 7.6 names 10 as
# common). Measured on smooth truths at 2-10 predictors: K = 20 has a bias similar to K = 10 and
# a 20-40 % smaller spread; K = 40 starts to add bias.
_GAMMA_NEIGHBOURS = 20

# Rules of noise="auto" for pure error (our choice, documented in estimate_noise).
_MIN_REPLICATE_GROUPS = 3  # groups of identical rows with at least two rows each
_MIN_REPLICATE_SHARE = 1.0 / 3.0  # share of all rows that lie in such groups
_FEW_DF = 10.0  # below this, a chosen pure-error estimate is flagged as rough in ``detail``
_PURE_DF_RATIO = 0.5  # pure error needs df >= this times the alternative's effective df

# Rows per block in the brute-force neighbour search (memory ~ block * n * 4 bytes).
_BLOCK_ROWS = 1024


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
# Public estimators
# --------------------------------------------------------------------------------------------


def replicate_variance(
    X: ArrayLike, y: ArrayLike, *, decimals: int | None = None
) -> tuple[float, float] | None:
    """Pure-error variance from groups of identical rows of ``X``.

    With ``m`` groups of identical rows (group ``j`` of size ``n_j``, ``n = sum n_j``)::

        SS_pe = sum_j sum_l (y_jl - ybar_j)^2,   df = n - m,   sigma2 = SS_pe / df

    This is the pure-error mean square of the lack-of-fit test (Draper & Smith 1998). It is
    unbiased for any ``f``, because ``f`` is constant within a group.

    Parameters
    ----------
    X : array-like of shape (n_samples, n_features) or (n_samples,)
        Predictors; a 1-D array is one predictor.
    y : array-like of shape (n_samples,)
        Responses.
    decimals : int or None, default=None
        If given, round every entry of ``X`` to this many decimals before grouping, so that
        floating-point near-duplicates count as replicates. Rows on either side of a rounding
        boundary stay apart, and any spread of ``f`` inside a group adds to the estimate.

    Returns
    -------
    tuple of (float, float) or None
        ``(sigma2, df)``, or None when no row repeats (``df = 0``).

    See Also
    --------
    estimate_noise : picks this estimator when ``df >= 2``.

    Examples
    --------
    >>> replicate_variance([1, 1, 2, 2, 3, 3], [1, 3, 2, 4, 6, 8])
    (2.0, 3.0)
    >>> replicate_variance([1, 2, 3], [1, 2, 3]) is None
    True
    >>> replicate_variance([0.1 + 0.2, 0.3, 1.0], [1.0, 2.0, 5.0], decimals=9)
    (0.5, 1.0)
    """
    Xa = _as_design(X, "X")
    ya = _as_y(y, Xa.shape[0])
    decimals = _check_decimals(decimals)
    return _replicates(Xa, ya, decimals)


def difference_variance(x: ArrayLike, y: ArrayLike) -> float:
    """Pseudo-residual variance estimator of Gasser, Sroka & Jennen-Steinmetz (1986).

    For one predictor, sorted by ``x``, each interior point is compared with the straight line
    through its two neighbours::

        a_i = (x_{i+1} - x_i) / (x_{i+1} - x_{i-1}),   b_i = 1 - a_i
        e_i = a_i y_{i-1} + b_i y_{i+1} - y_i,         c_i^2 = 1 / (a_i^2 + b_i^2 + 1)
        sigma2 = mean over i of c_i^2 e_i^2

    The estimator is exactly unbiased whenever ``f`` is linear, for any spacing of ``x``.

    Parameters
    ----------
    x : array-like of shape (n_samples,) or (n_samples, 1)
        One predictor, in any order and any spacing.
    y : array-like of shape (n_samples,)
        Responses.

    Returns
    -------
    float
        The estimate of ``sigma^2`` (>= 0).

    Notes
    -----
    **Ties in x** (our own choice). The formula needs ``x_{i+1} != x_{i-1}``. Rows with equal
    ``x`` are therefore replaced by their group mean, and the formula runs on the sorted
    distinct values ``x_(1) < ... < x_(m)``. A mean of ``n_j`` rows has variance
    ``sigma^2 / n_j``, so the weights become::

        c_i^2 = 1 / (a_i^2 / n_{i-1} + b_i^2 / n_{i+1} + 1 / n_i)

    Each ``c_i^2 e_i^2`` stays exactly unbiased for linear ``f``, and without ties this is the
    formula above. The spread inside a tied group is not used here; ``replicate_variance``
    measures it. At least 3 distinct ``x`` values are needed.

    See Also
    --------
    rice_variance, optimal_difference_variance : estimators that remove constants only.

    Examples
    --------
    >>> round(difference_variance([1, 2, 3, 4, 5], [1, 3, 2, 5, 4]), 6)  # 41/18
    2.277778
    >>> x = [0.0, 0.3, 1.0, 1.1, 1.1, 4.0]  # uneven, with a tie; y on a line: zero
    >>> round(difference_variance(x, [2.0, 2.6, 4.0, 4.2, 4.2, 10.0]), 12)
    0.0
    """
    xa = _as_x(x)
    ya = _as_y(y, xa.shape[0])
    return _gsj(xa, ya)


def rice_variance(x: ArrayLike, y: ArrayLike) -> float:
    """First-difference variance estimator of Rice (1984).

    After sorting by ``x`` (stable sort: tied ``x`` keep their input order)::

        sigma2 = (1 / (2 (n - 1))) sum_{i=1}^{n-1} (y_{i+1} - y_i)^2

    It is unbiased when ``f`` is constant; otherwise it is biased upward by
    ``(1 / (2 (n - 1))) sum (f(x_{i+1}) - f(x_i))^2``. Only the order of ``x`` is used.

    Parameters
    ----------
    x : array-like of shape (n_samples,) or (n_samples, 1)
        One predictor.
    y : array-like of shape (n_samples,)
        Responses.

    Returns
    -------
    float
        The estimate of ``sigma^2`` (>= 0). Needs at least 2 points.

    See Also
    --------
    optimal_difference_variance : order 1 equals this estimator.

    Examples
    --------
    >>> rice_variance([1, 2, 3, 4, 5], [1, 3, 2, 5, 4])
    1.875
    """
    xa = _as_x(x)
    ya = _as_y(y, xa.shape[0])
    return _difference_sequence(xa, ya, 1, "rice_variance")


def optimal_difference_variance(x: ArrayLike, y: ArrayLike, order: int = 2) -> float:
    """Optimal difference-sequence estimator of Hall, Kay & Titterington (1990).

    After sorting by ``x`` (stable sort), with the order-``m`` sequence ``d_0..d_m``
    (``sum d_j = 0``, ``sum d_j^2 = 1``)::

        sigma2_m = (1 / (n - m)) sum_{k=1}^{n-m} (sum_{j=0}^{m} d_j y_{k+j})^2

    The sequence minimises the asymptotic variance: with iid errors,
    ``n Var(sigma2_m) -> mu4 - sigma^4 + 4 delta sigma^4`` where ``delta = 1/(4m)``.

    Parameters
    ----------
    x : array-like of shape (n_samples,) or (n_samples, 1)
        One predictor; only its order is used.
    y : array-like of shape (n_samples,)
        Responses.
    order : {1, 2, 3}, default=2
        The order ``m``. Order 1 equals ``rice_variance``. Higher orders have smaller variance
        but more bias when ``f`` is not constant.

    Returns
    -------
    float
        The estimate of ``sigma^2`` (>= 0). Needs at least ``order + 1`` points.

    Notes
    -----
    The sequences used are ``(1, -1)/sqrt 2``, ``((1 + sqrt 5)/4, -1/2, (1 - sqrt 5)/4)`` and
    ``(0.194195, 0.280892, 0.383155, -0.858242)``, all with ``rho_l = -1/(2m)`` for every lag.

    Examples
    --------
    >>> round(optimal_difference_variance([1, 2, 3, 4, 5], [1, 3, 2, 5, 4], order=2), 6)
    2.071175
    >>> optimal_difference_variance([1, 2, 3], [7.0, 7.0, 7.0], order=1)
    0.0
    """
    xa = _as_x(x)
    ya = _as_y(y, xa.shape[0])
    m = _check_order(order)
    return _difference_sequence(xa, ya, m, "optimal_difference_variance")


def neighbour_variance(X: ArrayLike, y: ArrayLike) -> float:
    """Nearest-neighbour variance estimator for any number of predictors.

    Each column of ``X`` is scaled to unit standard deviation (constant columns are left as
    they are). With ``N(i)`` the nearest other row to row ``i`` (Euclidean distance)::

        sigma2 = (1 / (2 n)) sum_i (y_i - y_{N(i)})^2

    Unbiased when ``f`` is constant; otherwise biased upward by
    ``(1 / (2 n)) sum_i (f(x_i) - f(x_{N(i)}))^2``, a bias that shrinks slowly in many
    dimensions.

    Parameters
    ----------
    X : array-like of shape (n_samples, n_features) or (n_samples,)
        Predictors; a 1-D array is one predictor.
    y : array-like of shape (n_samples,)
        Responses.

    Returns
    -------
    float
        The estimate of ``sigma^2`` (>= 0). Needs at least 2 rows.

    Notes
    -----
    Ties are broken by the lowest row index: among the rows whose distance to row ``i`` is
    within a relative ``1e-9`` of the smallest, ``N(i)`` is the one with the lowest index.
    Duplicated rows are each other's neighbours (distance 0) and so act as pure error.

    Examples
    --------
    >>> neighbour_variance([0.0, 0.1, 1.0, 1.1], [1.0, 2.0, 5.0, 7.0])
    1.25
    >>> neighbour_variance([[0, 0], [0, 1], [5, 5], [5, 6]], [1.0, 1.0, 3.0, 5.0])
    1.0
    """
    Xa = _as_design(X, "X")
    ya = _as_y(y, Xa.shape[0])
    return _neighbours(Xa, ya)


def neighbour_trend_variance(
    X: ArrayLike, y: ArrayLike, *, n_neighbours: int = _GAMMA_NEIGHBOURS
) -> float:
    """Nearest-neighbour variance estimator with the trend of ``f`` regressed out (Gamma test).

    The first-neighbour estimator (``neighbour_variance``) is biased upward by half the mean
    squared change of ``f`` between neighbours. For smooth ``f`` that change grows in proportion
    to the squared neighbour distance, so the estimate is computed for the 1st, 2nd, ...,
    ``K``-th neighbour and extrapolated to distance zero. With ``N[i, k]`` the ``k``-th nearest
    other row to row ``i`` (after scaling each column to unit SD)::

        delta(k) = (1/n) sum_i ||x_{N[i,k]} - x_i||^2
        gamma(k) = (1/(2n)) sum_i (y_{N[i,k]} - y_i)^2
        gamma(k) = A delta(k) + Gamma    (least squares over k = 1..K)

    and the intercept ``Gamma`` estimates ``sigma^2`` (Stefansson, Koncar & Jones 1997;
    METHODS.md 7.6).

    Parameters
    ----------
    X : array-like of shape (n_samples, n_features) or (n_samples,)
        Predictors; a 1-D array is one predictor.
    y : array-like of shape (n_samples,)
        Responses.
    n_neighbours : int, default=20
        The number ``K`` of neighbour orders in the regression (at most ``n_samples - 1`` are
        used). Larger ``K`` lowers the variance but reaches farther neighbours, where the
        straight-line relation between ``gamma`` and ``delta`` holds less well.

    Returns
    -------
    float
        The estimate of ``sigma^2`` (>= 0; a negative intercept is returned as 0). Needs at
        least 2 rows.

    Notes
    -----
    **What it assumes.** ``f`` is smooth (so the mean squared change of ``f`` between a point
    and its ``k``-th neighbour is about proportional to ``delta(k)``); the noise is
    homoscedastic (otherwise the average of ``sigma^2(x)`` is estimated); the columns are on
    comparable scales once each is scaled to unit SD (an irrelevant or badly scaled column
    spoils the neighbours); and ``n`` is large enough for the dimension that the ``K``-th
    neighbour is still close, as the extrapolation runs from ``delta(1)..delta(K)`` down to 0.
    Measured on smooth truths with noise a fifth of the variance of ``y``, its relative bias
    was within a few per cent at 2 and 5 predictors and about 15 % at 10 predictors with
    ``n = 500``, where the first-neighbour estimator was biased upward by about 100 %.

    **Exactness.** The intercept is a fixed combination ``sum_k c_k gamma(k)`` with
    ``sum_k c_k = 1`` (the weights depend on the distances only), so the estimator is exactly
    unbiased when ``f`` is constant, adding a constant to ``y`` changes nothing, and scaling
    ``y`` by ``c`` scales it by ``c^2``. With one neighbour order (``n = 2`` or
    ``n_neighbours=1``), or when every ``delta(k)`` is equal (for instance when every row has at
    least ``K`` identical copies), it is the mean of the ``gamma(k)``.

    **Neighbours.** Distances are squared Euclidean distances of the scaled rows, computed from
    the coordinate differences; equal distances are ordered by the lowest row index, so the
    result is deterministic. The search is a blocked brute-force one (matrix products), about
    ``n^2 p`` operations: a few seconds at ``n = 20000`` and ``p = 50`` on two cores.

    See Also
    --------
    neighbour_variance : the first-neighbour estimator (exact toy values, larger bias).
    estimate_noise : uses this estimator for several predictors.

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(1)
    >>> X = rng.normal(size=(1000, 5))
    >>> y = np.sin(X).sum(axis=1) + rng.normal(0.0, 0.5, 1000)  # sigma^2 = 0.25
    >>> round(neighbour_trend_variance(X, y), 2), round(neighbour_variance(X, y), 2)
    (0.25, 0.38)
    >>> neighbour_trend_variance([[0.0, 1.0], [2.0, 3.0], [5.0, 1.0]], [4.0, 4.0, 4.0])
    0.0
    """
    Xa = _as_design(X, "X")
    ya = _as_y(y, Xa.shape[0])
    k = _check_neighbours(n_neighbours)
    return _gamma(Xa, ya, k)[0]


def estimate_noise(X: ArrayLike, y: ArrayLike, noise: Any = "auto") -> NoiseEstimate:
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


# --------------------------------------------------------------------------------------------
# Private computations (inputs already validated)
# --------------------------------------------------------------------------------------------


def _quiet_overflow(func: Callable[..., _T]) -> Callable[..., _T]:
    """Silence numpy's overflow warnings: ``_finite`` turns overflow into a clear error."""

    @functools.wraps(func)
    def wrapper(*args: Any, **kwargs: Any) -> _T:
        with np.errstate(over="ignore", invalid="ignore"):
            return func(*args, **kwargs)

    return wrapper


def _group_means(
    y: NDArray[np.float64], inverse: NDArray[np.intp], counts: NDArray[np.intp]
) -> NDArray[np.float64]:
    """Group means of ``y``, refined by a second pass for accuracy."""
    means = np.bincount(inverse, weights=y, minlength=counts.size) / counts
    correction = np.bincount(inverse, weights=y - means[inverse], minlength=counts.size) / counts
    return means + correction


@_quiet_overflow
def _replicates(
    X: NDArray[np.float64], y: NDArray[np.float64], decimals: int | None
) -> tuple[float, float] | None:
    keys = X if decimals is None else np.round(X, decimals)
    inverse, counts = row_groups(keys)  # signed zeros group together
    df = y.size - counts.size
    if df == 0:
        return None
    resid = y - _group_means(y, inverse, counts)[inverse]
    value = _finite(float(resid @ resid) / df, "replicate_variance")
    return value, float(df)


@_quiet_overflow
def _gsj_with_df(x: NDArray[np.float64], y: NDArray[np.float64]) -> tuple[float, float]:
    """GSJ estimate and its effective df ``N^2 / ||M||_F^2`` (``M``: pseudo-residual correlations)."""
    xs, inverse, counts = np.unique(x, return_inverse=True, return_counts=True)
    inverse = inverse.reshape(-1)
    if xs.size < 3:
        raise ValueError(
            "difference_variance needs at least 3 distinct x values (each interior point is "
            f"compared with its two neighbours); got {xs.size} distinct among {x.size} points."
        )
    ybar = _group_means(y, inverse, counts)
    h_left = xs[1:-1] - xs[:-2]
    h_right = xs[2:] - xs[1:-1]
    a = h_right / (h_left + h_right)
    b = 1.0 - a
    # a y_{i-1} + b y_{i+1} - y_i, written with differences so constants cancel exactly
    e = a * (ybar[:-2] - ybar[1:-1]) + b * (ybar[2:] - ybar[1:-1])
    w = 1.0 / (a**2 / counts[:-2] + b**2 / counts[2:] + 1.0 / counts[1:-1])
    value = _finite(float(np.mean(w * e**2)), "difference_variance")
    # The unit-variance pseudo-residuals r_i = sqrt(w_i) e_i share group means with r_{i+1} and
    # r_{i+2} only (a mean of n_j rows has variance sigma^2 / n_j), which gives their
    # correlations at lags 1 and 2 below; sigma2 = (1/N) sum r_i^2, so tr(A^2) = ||M||_F^2 / N^2.
    root = np.sqrt(w)
    lag1 = root[:-1] * root[1:] * (-a[1:] / counts[1:-2] - b[:-1] / counts[2:-1])
    lag2 = root[:-2] * root[2:] * b[:-2] * a[2:] / counts[2:-2]
    size = float(w.size)
    frob = size + 2.0 * float(lag1 @ lag1) + 2.0 * float(lag2 @ lag2)
    return value, size**2 / frob


def _gsj(x: NDArray[np.float64], y: NDArray[np.float64]) -> float:
    return _gsj_with_df(x, y)[0]


@_quiet_overflow
def _difference_sequence(x: NDArray[np.float64], y: NDArray[np.float64], m: int, who: str) -> float:
    n = x.size
    if n < m + 1:
        what = "rice_variance" if who == "rice_variance" else f"{who} of order {m}"
        raise ValueError(f"{what} needs at least {m + 1} points; got {n}.")
    ys = y[np.argsort(x, kind="stable")]
    ys = ys - ys.mean()  # sum d = 0, so centring changes nothing but rounding
    if m == 1:  # exactly Rice's (1/(2(n-1))) sum (y_{i+1} - y_i)^2
        diff = np.diff(ys)
        return _finite(float(diff @ diff) / (2.0 * (n - 1)), who)
    z = np.zeros(n - m)
    for j, dj in enumerate(_HKT_WEIGHTS[m]):
        z += dj * ys[j : n - m + j]
    return _finite(float(z @ z) / (n - m), who)


def _scale_columns(X: NDArray[np.float64]) -> NDArray[np.float64]:
    centred = X - X.mean(axis=0)
    sd = centred.std(axis=0)
    sd[np.ptp(X, axis=0) == 0] = 1.0
    if not np.all(np.isfinite(sd)) or not np.all(np.isfinite(centred)):
        raise ValueError("X has values too large to scale (overflow); rescale X first.")
    return centred / sd


def _nearest_other(Z: NDArray[np.float64]) -> NDArray[np.intp]:
    """Index of the nearest other row of ``Z``; ties go to the lowest index."""
    n, p = Z.shape
    tree = cKDTree(Z)
    k = min(n, max(8, 2 * p + 2))  # room for the 2p equidistant neighbours of a grid point
    dist, idx = tree.query(Z, k=k)
    rows = np.arange(n)
    other = idx != rows[:, None]
    nearest = np.where(other, dist, np.inf).min(axis=1)
    tied = other & (dist <= nearest[:, None] * (1.0 + _TIE_RTOL))
    choice = np.where(tied, idx, n).min(axis=1)
    if k < n:
        # every returned neighbour is tied: more tied rows may lie beyond the k returned
        crowded = np.flatnonzero(tied.sum(axis=1) == other.sum(axis=1))
        if crowded.size:
            balls = tree.query_ball_point(Z[crowded], r=nearest[crowded] * (1.0 + _TIE_RTOL))
            for row, ball in zip(crowded, balls, strict=True):
                choice[row] = min(j for j in ball if j != row)
    return choice


@_quiet_overflow
def _neighbours(X: NDArray[np.float64], y: NDArray[np.float64]) -> float:
    n = X.shape[0]
    if n < 2:
        raise ValueError(f"neighbour_variance needs at least 2 rows; got {n}.")
    nbr = _nearest_other(_scale_columns(X))
    d = y - y[nbr]
    return _finite(float(d @ d) / (2.0 * n), "neighbour_variance")


def _neighbours_with_df(X: NDArray[np.float64], y: NDArray[np.float64]) -> tuple[float, float]:
    value = _neighbours(X, y)
    nbr = _nearest_other(_scale_columns(X))
    return value, _pair_form_df(nbr[:, None], np.ones(1))


@dataclass(frozen=True)
class _PureError:
    """Pure error with the facts ``noise="auto"`` weighs."""

    value: float
    df: float
    groups: int  # groups of identical rows with two or more rows
    rows: int  # rows in those groups
    flat: int  # of those groups, the ones whose y are all identical


@dataclass(frozen=True)
class _Alternative:
    """A difference or neighbour estimate with its effective df and description."""

    method: str
    name: str
    value: float
    df_eff: float
    se: float
    text: str


@_quiet_overflow
def _pure_error(X: NDArray[np.float64], y: NDArray[np.float64]) -> _PureError | None:
    inverse, counts = row_groups(X)
    df = y.size - counts.size
    if df == 0:
        return None
    resid = y - _group_means(y, inverse, counts)[inverse]
    value = _finite(float(resid @ resid) / df, "replicate_variance")
    high = np.full(counts.size, -np.inf)
    low = np.full(counts.size, np.inf)
    np.maximum.at(high, inverse, y)
    np.minimum.at(low, inverse, y)
    repeated = counts >= 2
    return _PureError(
        value=value,
        df=float(df),
        groups=int(repeated.sum()),
        rows=int(counts[repeated].sum()),
        flat=int(np.sum(repeated & (high == low))),
    )


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


def _pair_form(idx: NDArray[np.intp], c: NDArray[np.float64]) -> sp.csr_matrix:
    """Sparse ``A`` of ``y^T A y = (1/(2n)) sum_i sum_k c_k (y_i - y_idx[i,k])^2``."""
    n, k = idx.shape
    rows = np.repeat(np.arange(n), k)
    cols = idx.ravel()
    w = np.tile(c, n) / (2.0 * n)
    A = sp.coo_matrix(
        (np.r_[w, w, -w, -w], (np.r_[rows, cols, rows, cols], np.r_[rows, cols, cols, rows])),
        shape=(n, n),
    ).tocsr()
    A.sum_duplicates()
    return A


def _pair_form_df(idx: NDArray[np.intp], c: NDArray[np.float64]) -> float:
    """Effective df ``1 / tr(A^2)`` of the pair form ``A`` (see ``_pair_form``)."""
    A = _pair_form(idx, c)
    trace_sq = float(A.data @ A.data)
    return 1.0 / trace_sq if trace_sq > 0 else math.inf


def _k_nearest(Z: NDArray[np.float64], k: int) -> tuple[NDArray[np.float64], NDArray[np.intp]]:
    """Squared distances and indices of the ``k`` nearest other rows, ordered (distance, index).

    Candidates come from single-precision matrix products in row blocks, with a threshold from
    a strided subset of the columns and a margin that covers single-precision rounding (a
    bound of ``(2p + 3) eps`` relative to ``||z_i||^2 + ||z_j||^2``, doubled); the
    candidates' distances are then recomputed in double precision from coordinate differences,
    so the result does not depend on the block layout.
    """
    n, p = Z.shape
    sq64 = np.einsum("ij,ij->i", Z, Z)
    # Per row i, ||z_i - z_j||^2 = ||z_i||^2 + 2 h_ij with h_ij = ||z_j||^2 / 2 - z_i . z_j,
    # one product of [Z, 1] with [-Z, ||z||^2 / 2]^T.
    left = np.hstack([Z, np.ones((n, 1))]).astype(np.float32)
    right = np.hstack([-Z, 0.5 * sq64[:, None]]).astype(np.float32)
    margin = 4.0 * (p + 4) * float(np.finfo(np.float32).eps) * (sq64 + sq64.max())
    step = max(1, min(8, (n - 1) // (k + 1)))
    d2_out = np.empty((n, k))
    idx_out = np.empty((n, k), dtype=np.intp)
    for r0 in range(0, n, _BLOCK_ROWS):
        r1 = min(n, r0 + _BLOCK_ROWS)
        b = r1 - r0
        H = left[r0:r1] @ right.T
        H[np.arange(b), np.arange(r0, r1)] = np.inf
        tau = np.partition(H[:, ::step], k - 1, axis=1)[:, k - 1].astype(np.float64)
        flat = np.flatnonzero(H <= (tau + margin[r0:r1]).astype(np.float32)[:, None])
        del H
        rr, cc = np.divmod(flat, n)
        d2 = np.empty(rr.size)
        for s in range(0, rr.size, 1 << 16):
            diff = Z[r0 + rr[s : s + (1 << 16)]] - Z[cc[s : s + (1 << 16)]]
            d2[s : s + (1 << 16)] = np.einsum("ij,ij->i", diff, diff)
        order = np.lexsort((cc, d2, rr))
        rr, cc, d2 = rr[order], cc[order], d2[order]
        starts = np.searchsorted(rr, np.arange(b))
        take = starts[:, None] + np.arange(k)
        d2_out[r0:r1] = d2[take]
        idx_out[r0:r1] = cc[take]
    return d2_out, idx_out


@_quiet_overflow
def _gamma(
    X: NDArray[np.float64], y: NDArray[np.float64], k: int
) -> tuple[float, float, int, bool, float]:
    """Gamma-test intercept (clipped at 0), effective df, orders used, clipped?, standard error."""
    n = X.shape[0]
    if n < 2:
        raise ValueError(f"neighbour_trend_variance needs at least 2 rows; got {n}.")
    k = min(k, n - 1)
    d2, idx = _k_nearest(_scale_columns(X), k)
    delta = d2.mean(axis=0)
    diff = y[idx] - y[:, None]
    gam = np.einsum("ik,ik->k", diff, diff) / (2.0 * n)
    centred = delta - delta.mean()
    spread = float(centred @ centred)
    if k >= 2 and spread > (1e-12 * float(np.max(np.abs(delta)))) ** 2 * k:
        c = 1.0 / k - delta.mean() * centred / spread  # least-squares intercept weights
    else:
        c = np.full(k, 1.0 / k)
    value = _finite(float(c @ gam), "neighbour_trend_variance")
    A = _pair_form(idx, c)
    trace_sq = float(A.data @ A.data)
    df_eff = 1.0 / trace_sq if trace_sq > 0 else math.inf
    # Var(y^T A y) = 2 sigma^4 tr(A^2) + 4 sigma^2 ||A f||^2 for Gaussian noise, and
    # E ||A y||^2 = ||A f||^2 + sigma^2 tr(A^2): the trend term is estimated by plug-in.
    level = max(value, 0.0) if value > 0 else max(float(gam[0]), 0.0)
    Ay = A @ y
    trend = max(float(Ay @ Ay) - level * trace_sq, 0.0)
    se = math.sqrt(2.0 * level**2 * trace_sq + 4.0 * level * trend)
    return max(value, 0.0), df_eff, k, value < 0, se


# --------------------------------------------------------------------------------------------
# Argument checks
# --------------------------------------------------------------------------------------------


def _short_repr(value: Any, limit: int = 80) -> str:
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 3] + "..."


def _finite(value: float, who: str) -> float:
    """Return ``value`` or raise if it overflowed (the caller silences numpy's warning)."""
    if not math.isfinite(value):
        raise ValueError(
            f"{who} overflowed (got {value!r}); rescale y (and x) to moderate magnitudes."
        )
    return value


def _check_real(name: str, value: Any) -> float:
    if isinstance(value, bool | np.bool_) or not isinstance(value, numbers.Real):
        raise TypeError(f"{name} must be a real number; got {_short_repr(value)}.")
    value = float(value)
    if not math.isfinite(value):
        raise ValueError(f"{name} must be finite; got {value!r}.")
    return value


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


def _check_decimals(decimals: Any) -> int | None:
    if decimals is None:
        return None
    if isinstance(decimals, bool | np.bool_) or not isinstance(decimals, numbers.Integral):
        raise TypeError(
            "decimals must be None or an int (digits to round X to before grouping); "
            f"got {_short_repr(decimals)}."
        )
    return int(decimals)


def _check_neighbours(n_neighbours: Any) -> int:
    if isinstance(n_neighbours, bool | np.bool_) or not isinstance(n_neighbours, numbers.Integral):
        raise TypeError(
            "n_neighbours must be an int >= 1 (neighbour orders in the Gamma-test regression); "
            f"got {_short_repr(n_neighbours)}."
        )
    if int(n_neighbours) < 1:
        raise ValueError(
            f"n_neighbours must be an int >= 1 (neighbour orders in the Gamma-test regression); "
            f"got {int(n_neighbours)!r}."
        )
    return int(n_neighbours)


def _check_order(order: Any) -> int:
    if isinstance(order, bool | np.bool_) or not isinstance(order, numbers.Integral):
        raise TypeError(f"order must be an int in 1, 2, 3; got {_short_repr(order)}.")
    if int(order) not in _HKT_WEIGHTS:
        raise ValueError(f"order must be 1, 2 or 3; got {int(order)!r}.")
    return int(order)


def _as_float_array(value: Any, name: str) -> NDArray[np.float64]:
    """Float view or copy of ``value``; the input itself is never written to."""
    if value is None or isinstance(value, str | bytes):
        raise TypeError(f"{name} must be an array of real numbers; got {_short_repr(value)}.")
    try:
        arr = np.asarray(value)
    except (TypeError, ValueError) as exc:  # ragged nested lists and the like
        raise TypeError(
            f"{name} must be an array of real numbers; got {_short_repr(value)} ({exc})."
        ) from None
    if arr.dtype.kind not in "biuf":
        raise TypeError(
            f"{name} must be an array of real numbers; got dtype {arr.dtype} "
            f"({_short_repr(value)})."
        )
    return arr.astype(np.float64, copy=False)


def _require_finite(arr: NDArray[np.float64], name: str) -> None:
    bad = ~np.isfinite(arr)
    if bad.any():
        first = np.argwhere(bad)[0]
        where = f"row {first[0]}" if arr.ndim == 1 else f"row {first[0]}, column {first[1]}"
        raise ValueError(
            f"{name} must be finite; it has {int(bad.sum())} NaN or infinite entries "
            f"(first at {where}). Remove or impute them first."
        )


def _as_design(X: Any, name: str) -> NDArray[np.float64]:
    arr = _as_float_array(X, name)
    if arr.ndim == 1:
        arr = arr[:, None]
    if arr.ndim != 2:
        raise ValueError(
            f"{name} must be 2-D of shape (n_samples, n_features) or 1-D for one predictor; "
            f"got shape {arr.shape}."
        )
    if arr.shape[0] == 0 or arr.shape[1] == 0:
        raise ValueError(f"{name} must have at least one row and one column; got {arr.shape}.")
    _require_finite(arr, name)
    return arr


def _as_x(x: Any) -> NDArray[np.float64]:
    arr = _as_float_array(x, "x")
    if arr.ndim == 2 and arr.shape[1] == 1:
        arr = arr[:, 0]
    if arr.ndim != 1:
        raise ValueError(
            "x must be one predictor: 1-D of shape (n_samples,) or 2-D of shape (n_samples, 1); "
            f"got shape {arr.shape}. Use neighbour_variance for several predictors."
        )
    if arr.size == 0:
        raise ValueError("x must have at least one value; got an empty array.")
    _require_finite(arr, "x")
    return arr


def _as_y(y: Any, n: int) -> NDArray[np.float64]:
    arr = _as_float_array(y, "y")
    if arr.ndim != 1:
        raise ValueError(f"y must be 1-D of shape (n_samples,); got shape {arr.shape}.")
    if arr.size != n:
        raise ValueError(f"y must have one value per row of x/X ({n}); got {arr.size} values.")
    _require_finite(arr, "y")
    return arr


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
