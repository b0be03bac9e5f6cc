"""Noise variance of ``y = f(x) + eps`` estimated without knowing ``f``.

Squared bias can only be separated from noise when the noise variance ``sigma^2`` is known or
estimated. This module offers four estimators and an automatic choice among them:

* pure error from repeated rows of ``X`` (``replicate_variance``), unbiased for any ``f``;
* difference-based estimators for one ordered predictor: pseudo-residuals
  (``difference_variance``), first differences (``rice_variance``) and optimal difference
  sequences (``optimal_difference_variance``);
* nearest-neighbour differences for any number of predictors (``neighbour_variance``).

``estimate_noise`` picks one (or uses the one asked for, or a value given by the caller) and
returns a ``NoiseEstimate`` that says which estimator was used.

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
from numpy.typing import ArrayLike, NDArray
from scipy.spatial import cKDTree

from ._validation import row_groups

__all__ = [
    "NoiseEstimate",
    "difference_variance",
    "estimate_noise",
    "neighbour_variance",
    "optimal_difference_variance",
    "replicate_variance",
    "rice_variance",
]

_T = TypeVar("_T")

# Values of ``NoiseEstimate.method``.
_METHODS: tuple[str, ...] = ("replicates", "differences", "neighbours", "given")

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
        One plain-English line describing the estimate.

    Examples
    --------
    >>> est = NoiseEstimate(2.0, "replicates", 3.0, "pure error from 6 rows in 3 groups (df = 3)")
    >>> est.value, est.method, est.df
    (2.0, 'replicates', 3.0)
    >>> NoiseEstimate.from_dict(est.to_dict()) == est
    True
    """

    value: float
    method: str
    df: float | None
    detail: str

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
        object.__setattr__(self, "value", value)
        object.__setattr__(self, "df", df)

    def to_dict(self) -> dict[str, Any]:
        """Return the fields as a JSON-friendly dict (plain floats, str and None).

        Returns
        -------
        dict
            Keys ``"value"``, ``"method"``, ``"df"`` and ``"detail"``.

        Examples
        --------
        >>> NoiseEstimate(0.25, "given", None, "given by the caller").to_dict()
        {'value': 0.25, 'method': 'given', 'df': None, 'detail': 'given by the caller'}
        """
        return {"value": self.value, "method": self.method, "df": self.df, "detail": self.detail}

    @classmethod
    def from_dict(cls, d: Mapping[str, Any]) -> NoiseEstimate:
        """Rebuild a ``NoiseEstimate`` from the output of ``to_dict``.

        Parameters
        ----------
        d : mapping
            Exactly the keys ``"value"``, ``"method"``, ``"df"`` and ``"detail"``.

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
        """
        if not isinstance(d, Mapping):
            raise TypeError(
                f"d must be a mapping such as the dict returned by to_dict(); got {_short_repr(d)}."
            )
        expected = {"value", "method", "df", "detail"}
        keys = set(d)
        if keys != expected:
            missing = sorted(expected - keys)
            extra = sorted(str(k) for k in keys - expected)
            raise ValueError(
                "d must have exactly the keys 'value', 'method', 'df', 'detail'; "
                f"missing {missing}, unexpected {extra}."
            )
        return cls(value=d["value"], method=d["method"], df=d["df"], detail=d["detail"])


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


def estimate_noise(X: ArrayLike, y: ArrayLike, noise: Any = "auto") -> NoiseEstimate:
    """Estimate the noise variance ``sigma^2``, or wrap one given by the caller.

    Parameters
    ----------
    X : array-like of shape (n_samples, n_features) or (n_samples,)
        Predictors; a 1-D array is one predictor. Not used when ``noise`` is a number.
    y : array-like of shape (n_samples,)
        Responses. Not used when ``noise`` is a number.
    noise : {"auto", "replicates", "differences", "neighbours"} or float, default="auto"
        * ``"auto"``: pure error (``replicate_variance``) when rows of ``X`` repeat with
          ``df >= 2``; otherwise, for one predictor with at least 3 distinct values, the
          pseudo-residual estimator (``difference_variance``); otherwise the nearest-neighbour
          estimator (``neighbour_variance``).
        * ``"replicates"``, ``"differences"``, ``"neighbours"``: use that estimator; a
          ``ValueError`` says why when it does not apply.
        * a real number >= 0: **the noise VARIANCE sigma^2** (not the standard deviation),
          returned as is with ``method="given"``. For noise SD ``s`` pass ``s**2``.

    Returns
    -------
    NoiseEstimate
        The value, the method used, degrees of freedom (pure error only) and a one-line detail.

    Raises
    ------
    TypeError
        If ``noise`` is a bool or neither a str nor a real number, or if ``X``/``y`` are not
        numeric.
    ValueError
        If ``noise`` is negative, not finite or an unknown name; if the forced method does not
        apply; or if ``X``/``y`` have bad shapes or non-finite entries.

    Examples
    --------
    >>> import numpy as np
    >>> est = estimate_noise(np.array([1, 1, 2, 2, 3, 3]), np.array([1, 3, 2, 4, 6, 8]))
    >>> est.method, est.value, est.df
    ('replicates', 2.0, 3.0)
    >>> estimate_noise(None, None, noise=0.5**2).value  # a variance: SD 0.5 -> 0.25
    0.25
    >>> rng = np.random.default_rng(0)
    >>> x = np.sort(rng.uniform(0, 1, 400))
    >>> y = np.sin(6 * x) + rng.normal(0, 0.1, 400)
    >>> est = estimate_noise(x, y)
    >>> est.method, round(est.value, 3)
    ('differences', 0.01)
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
    pure = _replicates(Xa, ya, None) if choice in ("auto", "replicates") else None
    if choice == "auto":
        if pure is not None and pure[1] >= 2:
            choice = "replicates"
        elif p == 1 and np.unique(Xa[:, 0]).size >= 3:
            choice = "differences"
        else:
            choice = "neighbours"
    if choice == "replicates":
        if pure is None:
            raise ValueError(
                f"noise='replicates' needs repeated rows of X, but all {n} rows are distinct "
                "(pure-error df = 0). Use noise='auto', 'differences' or 'neighbours', or give "
                "the noise variance as a number."
            )
        m = n - int(pure[1])
        return NoiseEstimate(
            pure[0],
            "replicates",
            pure[1],
            f"pure error from {n} rows in {m} groups of identical x (df = {int(pure[1])})",
        )
    if choice == "differences":
        if p != 1:
            raise ValueError(
                f"noise='differences' needs exactly one predictor, but X has {p} columns. "
                "Use noise='neighbours' (or 'auto') for several predictors."
            )
        n_distinct = np.unique(Xa[:, 0]).size
        value = _gsj(Xa[:, 0], ya)
        ties = "" if n_distinct == n else f"; tied x averaged, {n} rows"
        return NoiseEstimate(
            value,
            "differences",
            None,
            f"Gasser-Sroka-Jennen-Steinmetz pseudo-residuals over {n_distinct} distinct sorted "
            f"x values{ties}",
        )
    value = _neighbours(Xa, ya)
    columns = "1 column" if p == 1 else f"{p} columns"
    return NoiseEstimate(
        value,
        "neighbours",
        None,
        f"nearest-neighbour differences over {n} rows, {columns} scaled to unit SD",
    )


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
def _gsj(x: NDArray[np.float64], y: NDArray[np.float64]) -> float:
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
    return _finite(float(np.mean(w * e**2)), "difference_variance")


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
