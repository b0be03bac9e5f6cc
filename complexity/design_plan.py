"""Planning the next measurement from a pilot sweep: variance profiles, expected error, learning curve.

Given a pilot run (a :class:`~complexity.SweepResult` of a :class:`PolynomialLadder` and its
data) and a proposed design (set points × replicates, or any list of x values):

- :func:`variance_profile`: the variance of the fitted curve across the range that the design
  would give, ``sigma² z0' (Z'Z)^-1 z0`` with Z the design's basis matrix and ``sigma²`` the
  pilot's noise estimate (least-squares theory: it depends on the design, not on the readings).
- :func:`expected_error`: per degree, the expected squared bias, variance and test error over the
  range for that design. The squared bias needs a truth; here the **working truth** is the
  pilot's own fit at a higher degree (by default the highest degree swept). It is an assumption:
  bias that the pilot's curve cannot show is not counted.
- :func:`smallest_design`: of the designs the user lists, the one with the fewest readings whose
  largest standard error of the fitted curve over the range meets a target.
- :func:`learning_curve`: test error, squared bias and variance against training size for each
  degree, by subsampling the pilot data ("more data, or more capacity?").

Caution
-------
A plan is only as good as the pilot: it assumes the noise is as the pilot measured it and
constant over the range, and it says nothing outside the measured range of the pilot (no
extrapolation). Validate the resulting calibration against reference standards; local codes
and licensed practice decide what uncertainty is acceptable.
"""

from __future__ import annotations

import numbers
import warnings
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike, NDArray

from ._refit import (
    _fit_at,
    _held_out,
    _least_squares,
    _nested_fits,
    _Setup,
    _setup,
)
from ._validation import _short_repr, as_seed_sequence, check_int
from .bands import CAUTION
from .exceptions import ExtrapolationWarning

if TYPE_CHECKING:
    from .result import SweepResult

__all__ = [
    "expected_error",
    "learning_curve",
    "replicated_design",
    "smallest_design",
    "variance_profile",
]


def replicated_design(set_points: ArrayLike, replicates: int) -> NDArray[np.float64]:
    """The x values of a design that reads each set point ``replicates`` times.

    Examples
    --------
    >>> replicated_design([0.0, 10.0, 20.0], 2).tolist()
    [0.0, 0.0, 10.0, 10.0, 20.0, 20.0]
    """
    replicates = check_int("replicates", replicates, minimum=1)
    pts = np.array(set_points, dtype=np.float64, copy=True).reshape(-1)
    if pts.size == 0 or not np.isfinite(pts).all():
        raise ValueError(f"set_points must be finite numbers; got {_short_repr(set_points)}.")
    return np.repeat(pts, replicates)


def _as_design(setup: _Setup, design: Any, name: str = "design") -> NDArray[np.float64]:
    """A design as x values of shape (N, p): an array, or a (set_points, replicates) pair."""
    if (
        isinstance(design, tuple)
        and len(design) == 2
        and isinstance(design[1], numbers.Integral)
        and not isinstance(design[1], bool)
    ):
        x = replicated_design(design[0], int(design[1]))
    else:
        try:
            x = np.array(design, dtype=np.float64, copy=True)
        except (TypeError, ValueError):
            raise TypeError(
                f"{name} must be an array of x values or a (set_points, replicates) pair; got "
                f"{_short_repr(design)}."
            ) from None
    p = setup.X.shape[1]
    if x.ndim == 1:
        x = x.reshape(-1, 1) if p == 1 else x.reshape(1, -1)
    if x.ndim != 2 or x.shape[1] != p or not np.isfinite(x).all():
        raise ValueError(
            f"{name} must hold finite points with {p} coordinate(s); got shape {np.shape(x)}."
        )
    outside = ~np.all((x >= setup.low) & (x <= setup.high), axis=1)
    if outside.any():
        warnings.warn(
            f"{name} has {int(outside.sum())} point(s) outside the pilot's measured range "
            f"{np.column_stack([setup.low, setup.high]).tolist()}: the pilot's noise and curve "
            "say nothing there, so the plan extrapolates.",
            ExtrapolationWarning,
            stacklevel=3,
        )
    return x


def _grid(setup: _Setup, n_grid: int) -> NDArray[np.float64]:
    """Evaluation points over the measured range (a line for one predictor, else the data)."""
    n_grid = check_int("n_grid", n_grid, minimum=2)
    if setup.X.shape[1] == 1:
        return np.linspace(setup.low[0], setup.high[0], n_grid)[:, None]
    return setup.X.copy()


def _design_inverse(
    setup: _Setup, Zd: NDArray[np.float64], k: int, degree: int
) -> NDArray[np.float64]:
    """R^-1 of the design's first k basis columns (refusing a design that cannot fit the degree)."""
    try:
        fit = _least_squares(Zd, np.zeros(Zd.shape[0]), k, degree)
    except ValueError:
        raise ValueError(
            f"the design cannot fit degree {degree}: it has too few distinct set points "
            f"({np.unique(Zd, axis=0).shape[0]}) for {k} coefficients."
        ) from None
    return fit.r_inv


def variance_profile(
    result: SweepResult,
    X: ArrayLike,
    y: ArrayLike,
    design: Any,
    *,
    capacity: int | None = None,
    x_grid: ArrayLike | None = None,
    n_grid: int = 101,
) -> pd.DataFrame:
    """The variance of the fitted curve along x that a proposed design would give.

    Parameters
    ----------
    result : SweepResult
        The pilot sweep (a :class:`~complexity.PolynomialLadder`).
    X, y : array-like
        The pilot data.
    design : array-like or (set_points, replicates)
        The proposed x values (repeats allowed), or set points and the readings per point.
    capacity : int, optional
        The degree to be fitted; default the pilot's recommendation.
    x_grid : array-like, optional
        Where to evaluate; default ``n_grid`` points across the pilot's measured range (one
        predictor) or the pilot's own x (several).
    n_grid : int, default=101

    Returns
    -------
    pandas.DataFrame
        The predictor columns, ``variance`` (``sigma² z0' (Z'Z)^-1 z0``) and ``std_error``.
        ``attrs``: degree, ``sigma2`` (the pilot's noise estimate), design size, caution.

    Notes
    -----
    Least squares with noise variance sigma² on design Z gives ``Cov(beta) = sigma² (Z'Z)^-1``,
    so ``Var(yhat(x0)) = sigma² z0' (Z'Z)^-1 z0`` whatever the readings turn out to be (Draper &
    Smith 1998, ch. 3; from memory). Assumes constant noise over the range.

    Caution: nothing here holds outside the measured range (no extrapolation); validate the
    calibration against reference standards; local codes and licensed practice decide.

    Examples
    --------
    >>> import warnings
    >>> import complexity as cx
    >>> from complexity import design_plan
    >>> X, y = cx.datasets.pressure_sensor()
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     r = cx.sweep(cx.PolynomialLadder(range(0, 7)), X, y, plan=cx.Bootstrap(30),
    ...                  random_state=0)
    >>> plan = design_plan.variance_profile(r, X, y, ([-20, 0, 20, 40, 60], 4), capacity=3)
    >>> list(plan.columns)
    ['temperature_c', 'variance', 'std_error']
    """
    setup = _setup(result, X, y)
    pos = setup.position(capacity)
    xd = _as_design(setup, design)
    pts = _grid(setup, n_grid) if x_grid is None else _as_design(setup, x_grid, "x_grid")
    k, degree = setup.n_cols[pos], setup.degrees[pos]
    r_inv = _design_inverse(setup, setup.design(xd), k, degree)
    A = setup.design(pts)[:, :k] @ r_inv
    var = setup.noise * np.einsum("ij,ij->i", A, A)
    frame = pd.DataFrame(pts, columns=list(setup.names))
    frame["variance"] = var
    frame["std_error"] = np.sqrt(var)
    frame.attrs.update(
        capacity=degree, sigma2=setup.noise, n_measurements=int(xd.shape[0]), caution=CAUTION
    )
    return frame


def expected_error(
    result: SweepResult,
    X: ArrayLike,
    y: ArrayLike,
    design: Any,
    *,
    truth_capacity: int | None = None,
    n_grid: int = 201,
) -> pd.DataFrame:
    """Expected squared bias, variance and test error of every degree for a proposed design.

    Parameters
    ----------
    result, X, y
        The pilot sweep and its data.
    design : array-like or (set_points, replicates)
        The proposed design.
    truth_capacity : int, optional
        The degree of the pilot fit taken as the working truth; default the highest swept degree
        that the pilot data can fit with residual degrees of freedom left.
    n_grid : int, default=201
        Points across the range over which bias² and variance are averaged (uniform weight).

    Returns
    -------
    pandas.DataFrame
        Indexed by degree (those the design can fit, up to ``truth_capacity``): ``bias_sq``,
        ``variance``, ``noise``, ``test_mse`` (their sum: the expected error of a new reading
        at a point drawn uniformly over the range) and ``max_std_error`` of the fitted curve.

    Notes
    -----
    With the working truth ``g`` (the pilot's degree-``truth_capacity`` fit), a degree-d fit on
    design Z has mean ``z0' (Z'Z)^-1 Z' g(design)`` at x0 and variance ``sigma² z0' (Z'Z)^-1
    z0``; the bias is the first minus ``g(x0)``. The working truth is an assumption: it
    counts only the bias that the pilot's own curve shows, and it is itself noisy.

    Caution: nothing here holds outside the measured range (no extrapolation); validate the
    calibration against reference standards; local codes and licensed practice decide.

    Examples
    --------
    >>> import warnings
    >>> import complexity as cx
    >>> from complexity import design_plan
    >>> X, y = cx.datasets.pressure_sensor()
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     r = cx.sweep(cx.PolynomialLadder(range(0, 7)), X, y, plan=cx.Bootstrap(30),
    ...                  random_state=0)
    >>> table = design_plan.expected_error(r, X, y, (range(-20, 61, 10), 3))
    >>> list(table.columns)
    ['bias_sq', 'variance', 'noise', 'test_mse', 'max_std_error']
    """
    setup = _setup(result, X, y)
    xd = _as_design(setup, design)
    n = setup.X.shape[0]
    if truth_capacity is None:
        fits = [i for i, k in enumerate(setup.n_cols) if k < n]
        truth_pos = fits[-1]
    else:
        truth_pos = setup.position(truth_capacity)
    truth = _fit_at(setup, truth_pos)
    pts = _grid(setup, n_grid)
    Z0, Zd = setup.design(pts), setup.design(xd)
    g0, gd = truth.mean(Z0), truth.mean(Zd)
    distinct = np.unique(xd, axis=0).shape[0]
    rows = {}
    for pos in range(truth_pos + 1):
        k, degree = setup.n_cols[pos], setup.degrees[pos]
        if k > distinct:
            break
        fit = _least_squares(Zd, gd, k, degree)  # the fit to the noise-free working truth
        A = Z0[:, :k] @ fit.r_inv
        var = setup.noise * np.einsum("ij,ij->i", A, A)
        bias = fit.mean(Z0) - g0
        rows[degree] = {
            "bias_sq": float(np.mean(bias**2)),
            "variance": float(np.mean(var)),
            "noise": setup.noise,
            "test_mse": float(np.mean(bias**2) + np.mean(var) + setup.noise),
            "max_std_error": float(np.sqrt(var.max())),
        }
    frame = pd.DataFrame.from_dict(rows, orient="index")
    frame.index.name = "degree"
    frame.attrs.update(
        working_truth=f"the pilot's degree-{setup.degrees[truth_pos]} fit (an assumption)",
        sigma2=setup.noise,
        n_measurements=int(xd.shape[0]),
        caution=CAUTION,
    )
    return frame


def smallest_design(
    result: SweepResult,
    X: ArrayLike,
    y: ArrayLike,
    designs: Sequence[Any],
    target: float,
    *,
    capacity: int | None = None,
    n_grid: int = 201,
) -> pd.DataFrame:
    """Which of the listed designs reaches a target uncertainty of the fitted curve with fewest readings.

    Parameters
    ----------
    result, X, y
        The pilot sweep and its data.
    designs : sequence
        Proposed designs, each an array of x values or a ``(set_points, replicates)`` pair.
    target : float
        The largest acceptable standard error of the fitted curve anywhere in the measured range
        (in y units, one standard deviation).
    capacity : int, optional
        The degree to be fitted; default the pilot's recommendation.
    n_grid : int, default=201

    Returns
    -------
    pandas.DataFrame
        One row per design, in the order given: ``n_measurements``, ``n_set_points``,
        ``max_std_error``, ``mean_std_error``, ``meets_target`` and ``chosen`` (True on the
        design with the fewest readings that meets the target; ties go to the lower
        ``max_std_error``). ``attrs["chosen"]`` is its position, or None if no design meets it.

    Caution: nothing here holds outside the measured range (no extrapolation); validate the
    calibration against reference standards; local codes and licensed practice decide.

    Examples
    --------
    >>> import warnings
    >>> import complexity as cx
    >>> from complexity import design_plan
    >>> X, y = cx.datasets.pressure_sensor()
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     r = cx.sweep(cx.PolynomialLadder(range(0, 7)), X, y, plan=cx.Bootstrap(30),
    ...                  random_state=0)
    >>> options = [(range(-20, 61, 20), 2), (range(-20, 61, 10), 2), (range(-20, 61, 10), 4)]
    >>> table = design_plan.smallest_design(r, X, y, options, target=0.02, capacity=4)
    >>> table["n_measurements"].tolist()
    [10, 18, 36]
    """
    setup = _setup(result, X, y)
    if isinstance(target, bool) or not isinstance(target, numbers.Real) or not target > 0:
        raise ValueError(f"target must be a standard error > 0 (in y units); got {target!r}.")
    if isinstance(designs, (str, bytes)) or not isinstance(designs, Sequence) or not designs:
        raise TypeError(f"designs must be a non-empty list of designs; got {_short_repr(designs)}.")
    pos = setup.position(capacity)
    k, degree = setup.n_cols[pos], setup.degrees[pos]
    Z0 = setup.design(_grid(setup, n_grid))
    rows = []
    for i, design in enumerate(designs):
        xd = _as_design(setup, design, f"designs[{i}]")
        distinct = np.unique(xd, axis=0).shape[0]
        if distinct < k:
            se = np.full(Z0.shape[0], np.inf)
        else:
            A = Z0[:, :k] @ _design_inverse(setup, setup.design(xd), k, degree)
            se = np.sqrt(setup.noise * np.einsum("ij,ij->i", A, A))
        rows.append(
            {
                "n_measurements": int(xd.shape[0]),
                "n_set_points": int(distinct),
                "max_std_error": float(se.max()),
                "mean_std_error": float(se.mean()),
            }
        )
    frame = pd.DataFrame(rows)
    frame["meets_target"] = frame["max_std_error"] <= float(target)
    chosen = None
    if frame["meets_target"].any():
        ok = frame[frame["meets_target"]].sort_values(
            ["n_measurements", "max_std_error"], kind="stable"
        )
        chosen = int(ok.index[0])
    frame["chosen"] = frame.index == chosen
    frame.attrs.update(
        capacity=degree, target=float(target), chosen=chosen, sigma2=setup.noise, caution=CAUTION
    )
    return frame


def learning_curve(
    result: SweepResult,
    X: ArrayLike,
    y: ArrayLike,
    sizes: Sequence[int],
    *,
    n_repeats: int = 200,
    random_state: Any = None,
) -> pd.DataFrame:
    """Test error, squared bias and variance against training size, for every degree.

    Parameters
    ----------
    result, X, y
        The pilot sweep and its data.
    sizes : sequence of int
        Training sizes, each between 2 and n - 1.
    n_repeats : int, default=200
        Random subsets (without replacement) per size; each is fitted at every degree and
        scores the rows it left out.
    random_state : None, int, SeedSequence or Generator

    Returns
    -------
    pandas.DataFrame
        One row per (size, degree) with ``test_mse``, ``bias_sq``, ``variance``, ``noise`` and
        ``n_scored`` (rows scored by at least two subsets). A degree a subset cannot fit is
        left out of that subset's scores.

    Notes
    -----
    For each row i left out by at least two subsets, with the predictions ``p`` of the subsets
    that left it out: ``variance_i = mean (p - mean p)²``, ``test_i = mean (p - y_i)²`` and
    ``bias_sq_i + noise = (mean p - y_i)²``; the table averages over rows and subtracts the
    pilot's noise estimate, as the sweep does. A curve still falling at the largest size says
    more data would help; a flat curve whose squared bias stays large says more capacity.

    Examples
    --------
    >>> import warnings
    >>> import complexity as cx
    >>> from complexity import design_plan
    >>> X, y = cx.datasets.pressure_sensor()
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     r = cx.sweep(cx.PolynomialLadder(range(0, 5)), X, y, plan=cx.Bootstrap(30),
    ...                  random_state=0)
    >>> lc = design_plan.learning_curve(r, X, y, [20, 40], n_repeats=50, random_state=0)
    >>> lc.shape
    (10, 7)
    """
    setup = _setup(result, X, y)
    n = setup.X.shape[0]
    n_repeats = check_int("n_repeats", n_repeats, minimum=2)
    if isinstance(sizes, (str, bytes)) or not isinstance(sizes, Sequence) or not sizes:
        raise TypeError(f"sizes must be a non-empty list of ints; got {_short_repr(sizes)}.")
    checked = [check_int("sizes", s, minimum=2) for s in sizes]
    if max(checked) >= n:
        raise ValueError(f"sizes must be below n = {n} (some rows must be left out); got {sizes}.")
    rng = np.random.default_rng(as_seed_sequence(random_state))
    Z = setup.design(setup.X)
    rows = []
    for m in checked:
        keys = rng.random((n_repeats, n))
        take = np.argsort(keys, axis=1)[:, :m]
        weights = np.zeros((n_repeats, n))
        np.put_along_axis(weights, take, 1.0, axis=1)
        batch = _nested_fits(Z, setup.y, weights, Z[:1], setup.n_cols)
        held = _held_out(batch, weights, setup.y)
        for c, degree in enumerate(setup.degrees):
            used = np.isfinite(held.error[:, c])
            if not used.any():
                continue
            sq = (held.mean[used, c] - setup.y[used]) ** 2
            rows.append(
                {
                    "size": m,
                    "degree": degree,
                    "test_mse": float(held.error[used, c].mean()),
                    "bias_sq": float(sq.mean() - setup.noise),
                    "variance": float(held.var[used, c].mean()),
                    "noise": setup.noise,
                    "n_scored": int(used.sum()),
                }
            )
    frame = pd.DataFrame(rows)
    frame.attrs.update(sigma2=setup.noise, n_repeats=n_repeats, caution=CAUTION)
    return frame
