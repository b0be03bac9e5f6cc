"""Bands for a chosen polynomial fit, a band that includes choosing the degree, and inverse prediction.

Everything here starts from a :class:`~complexity.SweepResult` of a :class:`PolynomialLadder`
plus the data it was swept on (``X``, ``y``): the chosen degree is refitted on all the data by
least squares on the sweep's stable basis (Legendre polynomials of x mapped onto [-1, 1],
:mod:`complexity.basis`) through a QR factorisation, never through raw powers.

- **Confidence band** for the mean response ``f(x0)`` and **prediction band** for one new reading
  at ``x0`` (textbook t-based bands; NIST/SEMATECH e-Handbook of Statistical Methods §4.5 and
  Draper & Smith, *Applied Regression Analysis*, 3rd ed., ch. 3; section numbers from memory):
  ``yhat(x0) ± t_{1-a/2, n-p} s sqrt(z0' (Z'Z)^-1 z0)`` and
  ``yhat(x0) ± t_{1-a/2, n-p} s sqrt(1 + z0' (Z'Z)^-1 z0)``, with ``s² = RSS / (n - p)``.
- **Selection-aware band**: the whole choose-then-fit procedure is bootstrapped. In every
  replicate the degree is chosen again by the sweep's rule, refitted and evaluated; the band is
  centred on the average of those predictions (the smoothed, or bagged, estimate) with Efron's
  infinitesimal-jackknife standard deviation (Efron 2014, "Estimation and accuracy after model
  selection", JASA 109, 991-1007; formula numbers from memory).
- **Inverse prediction** (calibration): from a new reading ``y0`` the input ``x0`` at which the
  fitted curve equals ``y0``, with the interval of x values whose prediction band contains ``y0``
  (NIST/SEMATECH e-Handbook §2.3.6; section from memory).

Caution
-------
A band is a statement about this data set and this model only. It does not hold outside the
measured range of x (a polynomial diverges quickly beyond the data), and it does not replace
validating the calibration against reference standards; local codes and licensed practice
decide whether a calibration is fit for use.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike, NDArray
from scipy import optimize, stats

from . import criteria
from ._refit import (
    _Batch,
    _bootstrap_weights,
    _check_level,
    _fit_at,
    _in_range,
    _nested_fits,
    _points,
    _Setup,
    _setup,
)
from ._validation import _short_repr, check_int, check_option

if TYPE_CHECKING:
    from .result import SweepResult

__all__ = ["INTERVALS", "inverse_predict", "predict"]

#: the kinds of interval :func:`predict` gives
INTERVALS = ("confidence", "prediction", "selection")
#: where the noise variance of the textbook bands comes from
NOISES = ("residual", "sweep")

CAUTION = (
    "Caution: valid only inside the measured range of x (no extrapolation); validate the "
    "calibration against reference standards; local codes and licensed practice decide."
)


def _replicate_curve(
    batch: _Batch, weights: NDArray[np.float64], y: NDArray[np.float64], rule: str
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Each replicate's own selection curve (B, C) and its standard error, for ``rule``.

    "min", "one-se" and "loocv" use the leave-one-out error of the weighted fit, each original
    row left out with all its copies: ``e_i / (1 - w_i h_i)`` (the weighted form of PRESS,
    Allen 1974), averaged with the weights. The closed-form criteria use the weighted RSS.
    """
    w = weights[:, :, None]
    resid = y[None, :, None] - batch.fitted
    n = float(weights[0].sum())
    if rule in ("min", "one-se", "loocv"):
        room = 1.0 - w * batch.leverage
        inside = w > 0
        defined = np.where(inside, room > criteria.LEVERAGE_TOL, True).all(axis=1)
        loss = np.where(inside, (resid / np.where(inside, room, 1.0)) ** 2, 0.0)
        mean = (w * loss).sum(axis=1) / n
        spread = (w * (loss - mean[:, None, :]) ** 2).sum(axis=1) / n
        distinct = (weights > 0).sum(axis=1)[:, None]
        se = np.sqrt(spread / np.maximum(distinct - 1, 1))
        curve = np.where(batch.ok & defined, mean, np.inf)
        return curve, se
    rss = (w * resid**2).sum(axis=1)  # (B, C)
    return rss, np.zeros_like(rss)


def _choices(
    curve: NDArray[np.float64],
    se: NDArray[np.float64],
    ok: NDArray[np.bool_],
    n_cols: tuple[int, ...],
    n: int,
    rule: str,
) -> NDArray[np.intp]:
    """Capacity position chosen by ``rule`` in every replicate (-1 where none could be).

    Vectorised over replicates; the first (simplest) capacity wins ties, as in
    :mod:`complexity.rules`.
    """
    B, C = curve.shape
    params = np.array(n_cols, dtype=np.float64)
    usable = ok & np.isfinite(curve) & (params[None, :] < n)
    if rule in ("min", "one-se", "loocv"):
        values = np.where(usable, curve, np.inf)
    elif rule == "cp":
        # sigma² from the largest usable model of each replicate (criteria.mallows_cp's default)
        last = C - 1 - np.argmax(usable[:, ::-1], axis=1)
        rss_top = curve[np.arange(B), last]
        room = n - params[last]
        s2 = np.where(room > 0, rss_top / np.where(room > 0, room, 1.0), np.nan)
        with np.errstate(divide="ignore", invalid="ignore"):
            values = curve / s2[:, None] - n + 2.0 * params[None, :]
        values = np.where(usable & (s2[:, None] > 0), values, np.inf)
    else:
        func = {
            "aic": criteria.aic,
            "aicc": criteria.aicc,
            "bic": criteria.bic,
            "gcv": criteria.gcv,
        }
        flat = np.where(usable, curve, 1.0).reshape(-1)
        values = func[rule](flat, np.tile(params, B), n).reshape(B, C)
        values = np.where(usable, values, np.inf)
    any_ok = usable.any(axis=1)
    best = np.argmin(values, axis=1)
    if rule == "one-se":
        margin = se[np.arange(B), best]
        margin = np.where(np.isfinite(margin), margin, 0.0)
        threshold = values[np.arange(B), best] + margin
        best = np.argmax(values <= threshold[:, None], axis=1)
    return np.where(any_ok, best, -1).astype(np.intp)


def _selection_band(
    setup: _Setup, Z_new: NDArray[np.float64], n_boot: int, random_state: Any
) -> tuple[NDArray[np.float64], NDArray[np.float64], dict[str, Any]]:
    """Smoothed estimate and its infinitesimal-jackknife SD at the new points (Efron 2014)."""
    n = setup.X.shape[0]
    N = _bootstrap_weights(n, n_boot, random_state)
    Z = setup.design(setup.X)
    batch = _nested_fits(Z, setup.y, N, Z_new, setup.n_cols)
    curve, se = _replicate_curve(batch, N, setup.y, setup.rule)
    picks = _choices(curve, se, batch.ok, setup.n_cols, n, setup.rule)
    used = picks >= 0
    if used.sum() < 2:
        raise ValueError(
            "the degree could be chosen in fewer than 2 bootstrap replicates (rank-deficient "
            "resamples); use a smaller ladder or more data."
        )
    N, picks = N[used], picks[used]
    t = batch.evaluated[used][np.arange(used.sum()), :, picks]  # (B', m)
    B = t.shape[0]
    smooth = t.mean(axis=0)
    dt = t - smooth
    cov = (N - N.mean(axis=0)).T @ dt / B  # (n, m): Efron (2014) cov_j
    var_ij = (cov**2).sum(axis=0)
    # finite-B bias correction of the infinitesimal jackknife (Efron 2014; Wager, Hastie &
    # Efron 2014; from memory): subtract n/B² sum_b (t_b - s)²; kept only where it stays >= 0
    corrected = var_ij - n / B**2 * (dt**2).sum(axis=0)
    var = np.where(corrected > 0, corrected, var_ij)
    shares = np.bincount(picks, minlength=len(setup.degrees)) / B
    info = {
        "n_boot": int(B),
        "share_chosen": dict(zip(setup.degrees, shares.round(6).tolist())),
        "uncorrected_points": int((corrected <= 0).sum()),
    }
    return smooth, np.sqrt(var), info


# --------------------------------------------------------------------------------------------
# public: bands
# --------------------------------------------------------------------------------------------


def predict(
    result: SweepResult,
    X: ArrayLike,
    y: ArrayLike,
    x_new: ArrayLike,
    *,
    capacity: int | None = None,
    interval: str = "confidence",
    level: float = 0.95,
    noise: str = "residual",
    n_boot: int = 1000,
    random_state: Any = None,
    outside: str = "warn",
) -> pd.DataFrame:
    """Predict at new points with a confidence, prediction or selection-aware band.

    Parameters
    ----------
    result : SweepResult
        A sweep of a :class:`~complexity.PolynomialLadder`.
    X, y : array-like
        The data the sweep was run on (checked against the stored size and x range).
    x_new : array-like of shape (m,) or (m, n_features)
        Where to predict.
    capacity : int, optional
        The degree to fit; default the sweep's recommendation. Ignored by ``"selection"``,
        which chooses the degree again in every bootstrap replicate.
    interval : {"confidence", "prediction", "selection"}, default="confidence"
        ``"confidence"``: the mean response ``f(x0)`` at the fixed degree.
        ``"prediction"``: one new reading at ``x0`` at the fixed degree.
        ``"selection"``: the mean response, including the uncertainty of choosing the degree.
    level : float, default=0.95
        Coverage of the band.
    noise : {"residual", "sweep"}, default="residual"
        The noise variance of the textbook bands: ``"residual"`` is ``RSS/(n - p)`` of the fit with
        t quantiles on ``n - p`` degrees of freedom (the textbook band); ``"sweep"`` is the
        sweep's own estimate ``result.noise`` (t on its df, or normal quantiles without one).
        The selection band always adds the sweep's estimate for its prediction part.
    n_boot : int, default=1000
        Bootstrap replicates of the selection band.
    random_state : None, int, SeedSequence or Generator
        Seed of the selection band's bootstrap.
    outside : {"warn", "raise"}, default="warn"
        A point outside the measured range of X: warn with
        :class:`~complexity.ExtrapolationWarning` and mark it ``in_range = False``, or refuse.

    Returns
    -------
    pandas.DataFrame
        One row per point: the predictor columns, ``estimate``, ``std_error`` (of the estimate;
        for ``"prediction"`` of a new reading), ``lower``, ``upper`` and ``in_range``. The
        selection band adds ``fit_chosen`` (the full-data fit at ``capacity``); its ``estimate``
        is the smoothed (bootstrap-averaged) estimate. ``attrs`` holds the degree, interval,
        level, degrees of freedom, noise variance, method and the caution.

    Notes
    -----
    Textbook bands (NIST/SEMATECH e-Handbook §4.5; Draper & Smith 1998, ch. 3; from memory):
    ``yhat ± t s sqrt(h0)`` and ``yhat ± t s sqrt(1 + h0)`` with ``h0 = z0' (Z'Z)^-1 z0``. They
    assume the degree is right and was fixed before seeing the data.

    Selection-aware band (Efron 2014, smoothed bootstrap): in replicate b with counts ``N_bj``
    the degree is chosen by the sweep's rule and the chosen fit gives ``t_b(x0)``. The estimate is
    ``s(x0) = mean_b t_b(x0)`` and its standard deviation ``sqrt(sum_j cov_j²)`` with
    ``cov_j = mean_b (N_bj - mean N_j)(t_b - s)``, minus the finite-B bias ``n/B² sum (t_b - s)²``
    where that stays positive; the band is ``s ± z sd``. The rule is applied inside each
    replicate to what that replicate can compute in closed form: for "min" and "one-se" (and
    "loocv") a leave-one-out curve in which every original row is left out with all its copies,
    for "aic", "aicc", "bic", "gcv", "cp" the criterion itself. A fresh resampling sweep per
    replicate would cost a full sweep each.

    Caution: valid only inside the measured range (no extrapolation); validate the
    calibration against reference standards; local codes and licensed practice decide.

    Examples
    --------
    >>> import warnings
    >>> import complexity as cx
    >>> from complexity import bands
    >>> X, y = cx.datasets.pressure_sensor()
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     r = cx.sweep(cx.PolynomialLadder(range(0, 7)), X, y, plan=cx.Bootstrap(30),
    ...                  random_state=0)
    >>> table = bands.predict(r, X, y, [0.0, 20.0, 40.0], capacity=4, interval="prediction")
    >>> list(table.columns)
    ['temperature_c', 'estimate', 'std_error', 'lower', 'upper', 'in_range']
    >>> bool((table["lower"] < table["estimate"]).all())
    True
    """
    setup = _setup(result, X, y)
    check_option("interval", interval, INTERVALS)
    check_option("noise", noise, NOISES)
    level = _check_level(level)
    pts = _points(setup, x_new)
    inside = _in_range(setup, pts, outside)
    pos = setup.position(capacity)
    fit = _fit_at(setup, pos)
    Z_new = setup.design(pts)
    mean = fit.mean(Z_new)
    attrs: dict[str, Any] = {"capacity": setup.degrees[pos], "interval": interval, "level": level}
    if interval == "selection":
        n_boot = check_int("n_boot", n_boot, minimum=20)
        smooth, sd, info = _selection_band(setup, Z_new, n_boot, random_state)
        z = float(stats.norm.ppf(0.5 + level / 2))
        frame = _frame(setup, pts, smooth, sd, smooth - z * sd, smooth + z * sd, inside)
        frame["fit_chosen"] = mean
        attrs.update(
            info,
            rule=setup.rule,
            df=None,
            method="smoothed bootstrap of choose-then-fit, infinitesimal-jackknife SD (Efron 2014)",
        )
    else:
        if noise == "residual":
            if fit.df < 1:
                raise ValueError(
                    f"degree {fit.degree} leaves no residual degrees of freedom (n = {fit.n}, "
                    f"p = {fit.k}); use noise='sweep' or a lower degree."
                )
            s2 = fit.s2
            df: float | None = float(fit.df)
        else:
            s2, df = setup.noise, setup.noise_df
        q = (
            float(stats.t.ppf(0.5 + level / 2, df))
            if df
            else float(stats.norm.ppf(0.5 + level / 2))
        )
        h = fit.leverage(Z_new)
        se = np.sqrt(s2 * (h + (1.0 if interval == "prediction" else 0.0)))
        frame = _frame(setup, pts, mean, se, mean - q * se, mean + q * se, inside)
        attrs.update(df=df, sigma2=s2, noise=noise, method="t-based least-squares band")
    attrs["caution"] = CAUTION
    frame.attrs.update(attrs)
    return frame


def _frame(
    setup: _Setup,
    pts: NDArray[np.float64],
    estimate: NDArray[np.float64],
    se: NDArray[np.float64],
    lower: NDArray[np.float64],
    upper: NDArray[np.float64],
    inside: NDArray[np.bool_],
) -> pd.DataFrame:
    columns: dict[str, NDArray[Any]] = {name: pts[:, j] for j, name in enumerate(setup.names)}
    columns.update(estimate=estimate, std_error=se, lower=lower, upper=upper, in_range=inside)
    return pd.DataFrame(columns)


# --------------------------------------------------------------------------------------------
# public: inverse prediction
# --------------------------------------------------------------------------------------------


def _crossings(x: NDArray[np.float64], g: NDArray[np.float64]) -> NDArray[np.intp]:
    """Grid intervals [x_i, x_i+1] on which g changes sign (or touches zero at x_i+1)."""
    s = np.sign(g)
    return np.flatnonzero((s[:-1] * s[1:] < 0) | ((s[1:] == 0) & (s[:-1] != 0)))


def inverse_predict(
    result: SweepResult,
    X: ArrayLike,
    y: ArrayLike,
    y_new: ArrayLike,
    *,
    capacity: int | None = None,
    level: float = 0.95,
    n_readings: int = 1,
    grid_size: int = 4001,
) -> pd.DataFrame:
    """The input x at which the fitted curve gives a new reading, with its calibration interval.

    For each reading ``y0`` (one predictor only) the estimate is the x in the measured range
    where the fitted curve equals ``y0``; the interval is the set of x whose prediction band
    contains ``y0`` (NIST/SEMATECH e-Handbook §2.3.6, calibration; section from memory).

    Parameters
    ----------
    result : SweepResult
        A sweep of a :class:`~complexity.PolynomialLadder` on one predictor.
    X, y : array-like
        The data the sweep was run on (the calibration run).
    y_new : float or array-like of shape (k,)
        New readings.
    capacity : int, optional
        The degree; default the sweep's recommendation.
    level : float, default=0.95
        Coverage of the prediction band that is inverted.
    n_readings : int, default=1
        Each ``y0`` is the mean of this many new readings (the band's noise term becomes
        ``s² / n_readings``).
    grid_size : int, default=4001
        Points of the grid over the measured range on which crossings are searched (each
        crossing is then refined by root finding).

    Returns
    -------
    pandas.DataFrame
        One row per reading: ``reading``, ``estimate``, ``lower``, ``upper``. ``attrs`` holds the
        degree, level, residual df, the noise variance and the caution.

    Raises
    ------
    ValueError
        If a reading lies outside the values the fitted curve takes over the measured range, if
        the curve crosses it more than once (ambiguous), if the fitted curve is not monotone
        over the interval, or if the interval runs past the measured range (it would need
        extrapolation).

    Notes
    -----
    With ``s² = RSS/(n - p)`` and ``h(x) = z(x)' (Z'Z)^-1 z(x)``, the interval is
    ``{x : |y0 - yhat(x)| <= t_{1-a/2, n-p} s sqrt(1/n_readings + h(x))}``, the region between
    the crossings of the prediction band with ``y0`` nearest the estimate.

    Caution: valid only inside the measured range (no extrapolation); validate the calibration
    against reference standards; local codes and licensed practice decide.

    Examples
    --------
    >>> import warnings
    >>> import complexity as cx
    >>> from complexity import bands
    >>> X, y = cx.datasets.pressure_sensor()
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     r = cx.sweep(cx.PolynomialLadder(range(0, 7)), X, y, plan=cx.Bootstrap(30),
    ...                  random_state=0)
    >>> t = bands.inverse_predict(r, X, y, 0.3, capacity=4)
    >>> bool(t.loc[0, "lower"] < t.loc[0, "estimate"] < t.loc[0, "upper"])
    True
    """
    setup = _setup(result, X, y)
    if setup.X.shape[1] != 1:
        raise ValueError(
            f"inverse prediction needs one predictor; the sweep had {setup.X.shape[1]}."
        )
    level = _check_level(level)
    n_readings = check_int("n_readings", n_readings, minimum=1)
    grid_size = check_int("grid_size", grid_size, minimum=101)
    try:
        readings = np.array(y_new, dtype=np.float64, copy=True).reshape(-1)
    except (TypeError, ValueError):
        raise TypeError(f"y_new must be a number or numbers; got {_short_repr(y_new)}.") from None
    if readings.size == 0 or not np.isfinite(readings).all():
        raise ValueError(f"y_new must hold finite readings; got {_short_repr(y_new)}.")
    fit = _fit_at(setup, setup.position(capacity))
    if fit.df < 1:
        raise ValueError(f"degree {fit.degree} leaves no residual degrees of freedom.")
    q = float(stats.t.ppf(0.5 + level / 2, fit.df))
    lo, hi = float(setup.low[0]), float(setup.high[0])
    grid = np.union1d(np.linspace(lo, hi, grid_size), setup.X[:, 0])

    def curve(x: Any) -> Any:
        return fit.mean(setup.design(np.atleast_1d(np.asarray(x, dtype=np.float64))))

    def half(x: Any) -> Any:
        Z = setup.design(np.atleast_1d(np.asarray(x, dtype=np.float64)))
        return q * np.sqrt(fit.s2 * (1.0 / n_readings + fit.leverage(Z)))

    f_grid, w_grid = curve(grid), half(grid)
    rows = []
    for y0 in readings:
        rows.append(_invert_one(float(y0), grid, f_grid, w_grid, curve, half, fit.degree))
    frame = pd.DataFrame(rows, columns=["reading", "estimate", "lower", "upper"])
    frame.attrs.update(
        capacity=fit.degree,
        level=level,
        df=fit.df,
        sigma2=fit.s2,
        n_readings=n_readings,
        method="inverted least-squares prediction band (calibration interval)",
        caution=CAUTION,
    )
    return frame


def _root(func: Any, a: float, b: float) -> float:
    fa, fb = float(func(a)[0]), float(func(b)[0])
    if fa == 0.0:
        return a
    if fb == 0.0:
        return b
    return float(optimize.brentq(lambda v: float(func(v)[0]), a, b, xtol=1e-14, rtol=1e-15))


def _invert_one(
    y0: float,
    grid: NDArray[np.float64],
    f: NDArray[np.float64],
    w: NDArray[np.float64],
    curve: Any,
    half: Any,
    degree: int,
) -> tuple[float, float, float, float]:
    where = _crossings(grid, f - y0)
    if where.size == 0:
        raise ValueError(
            f"reading {y0!r} lies outside the values the degree-{degree} curve takes over the "
            f"measured range [{f.min():.6g}, {f.max():.6g}]; it would need extrapolation."
        )
    if where.size > 1:
        at = ", ".join(f"{grid[i]:.6g}" for i in where[:4])
        raise ValueError(
            f"reading {y0!r} is ambiguous: the degree-{degree} curve passes through it "
            f"{where.size} times in the measured range (near x = {at}); the curve is not "
            "monotone there, so one reading cannot be turned into one input."
        )
    i = int(where[0])
    x_hat = _root(lambda v: curve(v) - y0, float(grid[i]), float(grid[i + 1]))
    # the x values whose prediction band contains y0: |y0 - f(x)| <= w(x); x_hat is one of them
    j = int(np.searchsorted(grid, x_hat))
    grid = np.insert(grid, j, x_hat)
    f = np.insert(f, j, y0)
    w = np.insert(w, j, float(half(x_hat)[0]))
    inside = np.abs(y0 - f) <= w
    inside[j] = True
    a = j
    while a > 0 and inside[a - 1]:
        a -= 1
    b = j
    while b < grid.size - 1 and inside[b + 1]:
        b += 1
    if a == 0 or b == grid.size - 1:
        raise ValueError(
            f"reading {y0!r}: its calibration interval runs past the end of the measured range "
            f"[{grid[0]:.6g}, {grid[-1]:.6g}]; the bound would need extrapolation. Measure "
            "further out, or use a reading nearer the middle of the range."
        )
    if inside[:a].any() or inside[b + 1 :].any():
        raise ValueError(
            f"reading {y0!r} is ambiguous: the x values consistent with it form more than one "
            "interval in the measured range (the curve comes back within the band elsewhere)."
        )
    gap = lambda v: half(v) - np.abs(y0 - curve(v))  # noqa: E731 - >= 0 inside the band
    lower = _root(gap, float(grid[a - 1]), float(grid[a]))
    upper = _root(gap, float(grid[b]), float(grid[b + 1]))
    slope = np.diff(f[a - 1 : b + 2])
    if not (np.all(slope > 0) or np.all(slope < 0)):
        raise ValueError(
            f"reading {y0!r}: the degree-{degree} curve is not monotone over its interval "
            f"[{lower:.6g}, {upper:.6g}]; the inverse is ambiguous there."
        )
    return y0, x_hat, lower, upper
