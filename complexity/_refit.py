"""Refitting a swept polynomial ladder on its data: the shared base of bands, profiles and planning.

A :class:`~complexity.SweepResult` keeps the curves and settings but not the data; these helpers
check that ``X, y`` are the data it was swept on, rebuild its stable basis (Legendre polynomials
of x mapped onto [-1, 1], :mod:`complexity.basis`) and refit every degree by QR, for one data
set or for many bootstrap weightings at once. Private: :mod:`complexity.bands`,
:mod:`complexity.profiles` and :mod:`complexity.design_plan` are the public entry points.
"""

from __future__ import annotations

import math
import numbers
import warnings
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd
from numpy.typing import NDArray
from scipy import linalg

from ._text import noise_of
from ._validation import _short_repr, as_seed_sequence, check_option, check_X_y
from .basis import PolynomialBasis, n_total_degree_terms
from .exceptions import ExtrapolationWarning

if TYPE_CHECKING:
    from .result import SweepResult

#: how a point outside the measured range is handled
OUTSIDE = ("warn", "raise")

# --------------------------------------------------------------------------------------------
# the sweep's data and basis, reconstructed
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class _Setup:
    """What the refits need: the data, the ladder's degrees and the sweep's basis."""

    X: NDArray[np.float64]
    y: NDArray[np.float64]
    names: tuple[str, ...]
    degrees: tuple[int, ...]
    n_cols: tuple[int, ...]
    basis: PolynomialBasis
    low: NDArray[np.float64]
    high: NDArray[np.float64]
    noise: float
    noise_df: float | None
    rule: str
    recommended: int

    def design(self, x: NDArray[np.float64]) -> NDArray[np.float64]:
        """Every basis column up to the largest degree, at x."""
        return self.basis.transform(x)

    def position(self, capacity: Any) -> int:
        if capacity is None:
            capacity = self.recommended
        if isinstance(capacity, bool) or not isinstance(capacity, numbers.Integral):
            raise TypeError(
                f"capacity must be one of the swept degrees {list(self.degrees)} (an int) or None "
                f"for the recommended one; got {_short_repr(capacity)}."
            )
        if int(capacity) not in self.degrees:
            raise ValueError(
                f"capacity must be one of the swept degrees {list(self.degrees)}; got {capacity!r}."
            )
        return self.degrees.index(int(capacity))


def one_curve(result: SweepResult) -> bool:
    """Whether ``result`` is a squared-error polynomial sweep of one predictor (one curve in x).

    The calibration outputs of the report and the command line are drawn for these only.

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> meta = {"ladder": {"kind": "polynomial"}, "x_range": [[0.0, 1.0]]}
    >>> one_curve(SimpleNamespace(metadata=meta, noise=1.0))
    True
    >>> one_curve(SimpleNamespace(metadata={**meta, "x_range": [[0, 1], [0, 2]]}, noise=1.0))
    False
    """
    meta = result.metadata
    return (
        result.noise is not None
        and (meta.get("ladder") or {}).get("kind") == "polynomial"
        and len(meta.get("x_range") or []) == 1
    )


def _setup(result: SweepResult, X: Any, y: Any) -> _Setup:
    """Check that X, y are the data of ``result`` (a polynomial sweep) and rebuild its basis."""
    meta = getattr(result, "metadata", None)
    if not isinstance(meta, dict) or "ladder" not in meta:
        raise TypeError(
            f"result must be the SweepResult of complexity.sweep; got {_short_repr(result)}."
        )
    ladder = meta["ladder"]
    if ladder.get("kind") != "polynomial":
        raise ValueError(
            "bands, inverse prediction and design planning need a PolynomialLadder sweep; this "
            f"result swept a {ladder.get('kind')!r} ladder."
        )
    data = check_X_y(X, y)
    Xa, ya = data.X, data.y
    n_meta = meta.get("n_samples")
    if n_meta is not None and n_meta != Xa.shape[0]:
        raise ValueError(
            f"X has {Xa.shape[0]} rows but the sweep was run on {n_meta}; pass the X, y the "
            "result was swept on."
        )
    low, high = Xa.min(axis=0), Xa.max(axis=0)
    stored = meta.get("x_range")
    if stored is not None:
        ref = np.asarray(stored, dtype=np.float64)
        if ref.shape != (Xa.shape[1], 2) or not np.allclose(
            ref, np.column_stack([low, high]), rtol=1e-12, atol=0.0
        ):
            raise ValueError(
                f"X spans {np.column_stack([low, high]).tolist()} but the sweep's data spanned "
                f"{stored}; pass the X, y the result was swept on."
            )
    degrees = tuple(int(d) for d in ladder["degrees"])
    domain = ladder.get("domain")
    box = (
        np.array([domain], dtype=np.float64) if domain is not None else np.column_stack([low, high])
    )
    basis = PolynomialBasis(max(degrees), domain=box).fit(Xa)
    p = Xa.shape[1]
    names = data.feature_names or tuple(f"x{j}" for j in range(p))
    noise = noise_of(result)
    return _Setup(
        X=Xa,
        y=ya,
        names=tuple(str(v) for v in names),
        degrees=degrees,
        n_cols=tuple(n_total_degree_terms(p, d) for d in degrees),
        basis=basis,
        low=low,
        high=high,
        noise=float(noise.value),
        noise_df=None if noise.df is None else float(noise.df),
        rule=str(result.rule),
        recommended=int(result.recommended),
    )


def _points(setup: _Setup, x_new: Any, name: str = "x_new") -> NDArray[np.float64]:
    """x_new as a float copy of shape (m, p)."""
    if isinstance(x_new, pd.DataFrame):
        arr = x_new.to_numpy(dtype=np.float64, copy=True)
    elif isinstance(x_new, (str, bytes)) or x_new is None:
        raise TypeError(f"{name} must be an array-like of numbers; got {_short_repr(x_new)}.")
    else:
        try:
            arr = np.array(x_new, dtype=np.float64, copy=True)
        except (TypeError, ValueError):
            raise TypeError(
                f"{name} must be an array-like of numbers; got {_short_repr(x_new)}."
            ) from None
    p = setup.X.shape[1]
    if arr.ndim == 0:
        arr = arr.reshape(1, 1)
    if arr.ndim == 1:
        arr = arr.reshape(-1, 1) if p == 1 else arr.reshape(1, -1)
    if arr.ndim != 2 or arr.shape[1] != p or arr.shape[0] == 0:
        raise ValueError(
            f"{name} must hold points with {p} coordinate(s) (shape (m, {p})); got shape "
            f"{np.shape(x_new)}."
        )
    if not np.isfinite(arr).all():
        raise ValueError(f"{name} contains NaN or infinite values; give finite points.")
    return arr


def _in_range(setup: _Setup, pts: NDArray[np.float64], outside: str) -> NDArray[np.bool_]:
    """True where a point lies inside the measured box; warn or refuse elsewhere."""
    check_option("outside", outside, OUTSIDE)
    inside = np.all((pts >= setup.low) & (pts <= setup.high), axis=1)
    if not inside.all():
        bad = pts[~inside][0].tolist()
        text = (
            f"{int((~inside).sum())} point(s) lie outside the measured range "
            f"{np.column_stack([setup.low, setup.high]).tolist()} (first: {bad}); a polynomial "
            "there is an extrapolation and its band means nothing."
        )
        if outside == "raise":
            raise ValueError(text + " Keep the points inside the range, or pass outside='warn'.")
        warnings.warn(
            text + " Those rows have in_range = False.", ExtrapolationWarning, stacklevel=3
        )
    return inside


def _check_level(level: Any) -> float:
    if isinstance(level, bool) or not isinstance(level, numbers.Real):
        raise TypeError(f"level must be a number between 0 and 1; got {_short_repr(level)}.")
    if not 0.0 < float(level) < 1.0:
        raise ValueError(f"level must lie strictly between 0 and 1 (e.g. 0.95); got {level!r}.")
    return float(level)


# --------------------------------------------------------------------------------------------
# least squares at one degree (full data)
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class _LeastSquares:
    """One degree fitted on all data: ``coef`` on the basis, ``r_inv`` = R^-1 of Z = QR."""

    degree: int
    k: int
    coef: NDArray[np.float64]
    r_inv: NDArray[np.float64]
    rss: float
    n: int

    @property
    def df(self) -> int:
        return self.n - self.k

    @property
    def s2(self) -> float:
        return self.rss / self.df if self.df > 0 else math.nan

    def mean(self, Z: NDArray[np.float64]) -> NDArray[np.float64]:
        return Z[:, : self.k] @ self.coef

    def leverage(self, Z: NDArray[np.float64]) -> NDArray[np.float64]:
        """``z0' (Z'Z)^-1 z0`` at each row of Z (= ||z0' R^-1||²)."""
        A = Z[:, : self.k] @ self.r_inv
        return np.einsum("ij,ij->i", A, A)


def _least_squares(
    Z: NDArray[np.float64], y: NDArray[np.float64], k: int, degree: int
) -> _LeastSquares:
    Zk = Z[:, :k]
    Q, R = np.linalg.qr(Zk)
    diag = np.abs(np.diag(R))
    if diag.min() <= Zk.shape[0] * np.finfo(np.float64).eps * diag.max():
        raise ValueError(
            f"degree {degree} is numerically rank deficient on these x values "
            f"(|R_kk| / |R_00| = {diag.min() / diag.max():.2e}); choose a lower degree."
        )
    r_inv, info = linalg.lapack.dtrtri(R, lower=0)  # R^-1 of the upper triangle
    if info != 0:  # pragma: no cover - excluded by the rank check above
        raise ValueError(f"degree {degree}: the triangular factor is singular (info {info}).")
    coef = r_inv @ (Q.T @ y)
    rss = float(np.sum((y - Zk @ coef) ** 2))
    return _LeastSquares(degree, k, coef, r_inv, rss, Zk.shape[0])


def _fit_at(setup: _Setup, pos: int) -> _LeastSquares:
    return _least_squares(setup.design(setup.X), setup.y, setup.n_cols[pos], setup.degrees[pos])


# --------------------------------------------------------------------------------------------
# every degree on many weighted copies of the data at once (bootstrap, subsamples)
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class _Batch:
    """Weighted least-squares fits of every degree for B weight vectors.

    ``evaluated`` (B, m, C): predictions at the evaluation points; ``fitted`` (B, n, C) at the
    data; ``leverage`` (B, n, C): ``z_i' (Z'WZ)^-1 z_i`` of one copy of row i; ``ok`` (B, C):
    the design of that degree has full rank in that replicate.
    """

    evaluated: NDArray[np.float64]
    fitted: NDArray[np.float64]
    leverage: NDArray[np.float64]
    ok: NDArray[np.bool_]


def _nested_fits(
    Z: NDArray[np.float64],
    y: NDArray[np.float64],
    weights: NDArray[np.float64],
    Z_eval: NDArray[np.float64],
    n_cols: tuple[int, ...],
) -> _Batch:
    """Fit every degree for every weight vector from one batched QR of sqrt(W) Z.

    With sqrt(W) Z = Q R (no pivoting) and A = Z0 R^-1 (R^-1 upper triangular), the fit on the
    first k columns predicts ``cumsum(A * (Q' sqrt(W) y))[k-1]`` and has leverage
    ``cumsum(A²)[k-1]`` at z0 (METHODS.md §9, nested QR): every degree from one factorisation.
    """
    root = np.sqrt(weights)  # (B, n)
    Q, R = np.linalg.qr(root[:, :, None] * Z[None, :, :])  # (B, n, P), (B, P, P)
    z = np.einsum("bnp,bn->bp", Q, root * y[None, :])
    diag = np.abs(np.diagonal(R, axis1=1, axis2=2))
    tol = Z.shape[0] * np.finfo(np.float64).eps * np.maximum(diag[:, :1], 1e-300)
    good = np.cumprod(diag > tol, axis=1).astype(bool)  # rank lost at k: lost for every k' >= k
    # the columns from the first lost one on are replaced by identity: the leading (good) block
    # of R, and so of R^-1, is untouched, and the fits that need a lost column are marked not ok
    bad = ~good
    safe = np.where(bad[:, :, None] | bad[:, None, :], np.eye(R.shape[1])[None], R)
    r_inv = np.linalg.inv(np.triu(safe))
    cols = np.array(n_cols) - 1

    def at(Zp: NDArray[np.float64]) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        A = np.einsum("mp,bpq->bmq", Zp, r_inv)
        pred = np.cumsum(A * z[:, None, :], axis=2)[:, :, cols]
        lev = np.cumsum(A * A, axis=2)[:, :, cols]
        return pred, lev

    evaluated, _ = at(Z_eval)
    fitted, leverage = at(Z)
    ok = good[:, cols]
    return _Batch(evaluated, fitted, leverage, ok)


@dataclass(frozen=True)
class _HeldOut:
    """Per point and capacity, over the replicates that did not train on the point.

    ``count`` (n, C), ``mean`` and ``var`` of those predictions, ``error`` their mean squared
    error against y (NaN where fewer than two replicates scored the point).
    """

    count: NDArray[np.float64]
    mean: NDArray[np.float64]
    var: NDArray[np.float64]
    error: NDArray[np.float64]


def _held_out(batch: _Batch, weights: NDArray[np.float64], y: NDArray[np.float64]) -> _HeldOut:
    """Out-of-bag (or held-out) moments of the predictions at the data points."""
    scored = (weights == 0)[:, :, None] & batch.ok[:, None, :]  # (B, n, C)
    pred = np.where(scored, batch.fitted, 0.0)
    count = scored.sum(axis=0).astype(np.float64)
    enough = count >= 2
    safe = np.where(enough, count, 1.0)
    mean = pred.sum(axis=0) / safe
    # spread about the point's own mean (divisor count), so error = var + (mean - y)² exactly
    var = np.where(scored, (batch.fitted - mean[None]) ** 2, 0.0).sum(axis=0) / safe
    error = np.where(scored, (batch.fitted - y[None, :, None]) ** 2, 0.0).sum(axis=0) / safe
    nan = np.where(enough, 1.0, np.nan)
    return _HeldOut(count, mean * nan, var * nan, error * nan)


def _bootstrap_weights(n: int, n_boot: int, random_state: Any) -> NDArray[np.float64]:
    rng = np.random.default_rng(as_seed_sequence(random_state))
    draws = rng.integers(0, n, size=(n_boot, n))
    counts = np.zeros((n_boot, n))
    np.add.at(counts, (np.arange(n_boot)[:, None], draws), 1.0)
    return counts
