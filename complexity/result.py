"""``SweepResult``: the curves, the recommendation, the reasons, and everything to reproduce it.

Results are saved as one JSON document (UTF-8, schema below) and reload exactly: floats are
written with Python's shortest round-trip representation, non-finite values as the strings
``"NaN"``, ``"Infinity"`` and ``"-Infinity"``. No pickle is involved, so a saved result can be read
by any tool. Schema (``"format": "complexity.sweep-result"``, ``"version": 1``)::

    {"format", "version",
     "capacity_name": str, "capacities": [...], "recommended": value, "rule": str,
     "curves":    {"columns": [...], "dtypes": {column: numpy dtype name},
                   "data": {column: [...]}},
     "rules":     [{"rule", "capacity", "reason"}, ...],
     "stability": [share per capacity],
     "noise":     {"value", "method", "df", "detail", "se"},
     "failures":  [{"capacity", "count", "first_message"}, ...],
     "notes":     [str, ...],
     "metadata":  {...},
     "inclusion": {"columns": [...], "data": [[share, ...] per capacity]}   (feature ladders only),
     "coefficients": null (no tables) or
                  [{"capacity", "index_name", "terms": [...], "estimate": [...],
                    "std_error": [...], "attrs": {str: str}}
                   or {"capacity", "unavailable": reason}, ...]}

What survives a save and a load: everything above, the floats bit for bit, including every
coefficient table :meth:`SweepResult.coefficients` can give (a table it cannot give is saved as
its reason, and asking for it after loading raises the same ``ValueError`` message). What does
not: ``predictions`` (``keep_predictions=True``; a loaded result has ``None``), and in
``metadata`` tuples come back as lists and numpy values as plain Python numbers and lists.
Files written before the coefficient tables were saved load without them, and
:meth:`SweepResult.coefficients` says so.
"""

from __future__ import annotations

import html
import json
import math
from collections.abc import Iterator, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from ._labels import capacity_index
from ._text import CAUTION as CAUTION  # the general caution, importable from here as before
from ._text import CURVE_COLUMNS, caution_text, ladder_kind
from .noise import NoiseEstimate

__all__ = ["SweepResult", "load_result"]

FORMAT = "complexity.sweep-result"
VERSION = 1


@dataclass
class SweepResult:
    """The outcome of :func:`complexity.sweep`.

    Attributes
    ----------
    curves : pandas.DataFrame
        One row per capacity (index named after the capacity, e.g. ``degree``), simplest first.
        Columns: ``train_mse`` (training error of the model fitted on all data; for a simulation,
        the mean over simulated training sets), ``test_mse`` (out-of-bag, held-out, or expected
        error at new data), ``test_mse_se``, ``bias_sq``, ``variance``, ``oob_excess``,
        ``noise``, ``bias_sq_plus_noise``, bootstrap-only ``test_mse_632`` and
        ``test_mse_632plus``,
        ``n_scored``, ``failed_fits``, and for least-squares ladders the closed-form criteria.
    recommended : object
        The capacity chosen by ``rule``.
    rule : str
        The rule behind ``recommended``.
    rules : pandas.DataFrame
        Indexed by rule name: ``capacity`` and a one-line ``reason``.
    stability : pandas.Series
        Share of replicates in which each capacity would have been chosen by ``rule``.
    noise : NoiseEstimate or None
        The noise variance used to split bias² from noise, with its method (None for a sweep
        under another loss, whose split is stated in ``metadata["loss_split"]``).
    failures : pandas.DataFrame
        Per capacity with failed fits: ``count`` and ``first_message``.
    notes : list of str
        Things a careful reader should know (warnings raised during the sweep).
    metadata : dict
        n, plan, ladder, seed entropy, library versions, run time, engine.
    predictions : ndarray or None
        With ``keep_predictions=True``: predictions of shape (n_resamples, n_points, n_capacities),
        NaN where a point was not scored by a resample.
    inclusion : pandas.DataFrame or None
        Feature ladders only: indexed by count, one column per predictor (named after the
        DataFrame's columns, else ``x0, x1, ...``), the share of resamples whose training set put
        that predictor among the first k (for a ranked order, ranked inside each training set).

    Examples
    --------
    >>> import complexity as cx
    >>> X, y = cx.datasets.pressure_sensor()
    >>> result = cx.sweep(cx.PolynomialLadder(range(0, 5)), X, y, plan=cx.Bootstrap(20),
    ...                   random_state=0)
    >>> list(result.curves.columns[:3])
    ['train_mse', 'test_mse', 'test_mse_se']
    """

    curves: pd.DataFrame
    recommended: Any
    rule: str
    rules: pd.DataFrame
    stability: pd.Series
    noise: NoiseEstimate | None
    failures: pd.DataFrame
    notes: list[str] = field(default_factory=list)
    metadata: dict[str, Any] = field(default_factory=dict)
    predictions: np.ndarray | None = field(default=None, repr=False)
    coefficient_tables: Mapping[Any, pd.DataFrame] | None = field(default=None, repr=False)
    inclusion: pd.DataFrame | None = field(default=None, repr=False)

    def coefficients(self, capacity: Any) -> pd.DataFrame:
        """Coefficients of the model fitted on all data at ``capacity``, in the user's units.

        Available for least-squares ladders on the exact engine: a DataFrame indexed by term
        (e.g. ``x^2`` or a predictor's name) with ``estimate`` and ``std_error``.

        Examples
        --------
        >>> import complexity as cx
        >>> X, y = cx.datasets.pressure_sensor()
        >>> r = cx.sweep(cx.PolynomialLadder(range(0, 3)), X, y, plan=cx.Bootstrap(10), random_state=0)
        >>> list(r.coefficients(1).columns)
        ['estimate', 'std_error']
        """
        tables = self.coefficient_tables
        if not tables:
            raise ValueError(getattr(tables, "missing", None) or _NO_TABLES)
        if capacity not in tables:
            raise ValueError(f"capacity must be one of {list(tables)}; got {capacity!r}.")
        return tables[capacity]

    @property
    def capacity_name(self) -> str:
        return str(self.curves.index.name)

    def summary(self) -> str:
        """A plain-text report: the curves table, the recommendation with its reason, cautions.

        Examples
        --------
        >>> import complexity as cx
        >>> X, y = cx.datasets.pressure_sensor()
        >>> r = cx.sweep(cx.PolynomialLadder(range(0, 4)), X, y, plan=cx.Bootstrap(20), random_state=0)
        >>> "Recommended" in r.summary()
        True
        """
        name = self.capacity_name
        table = self.curves[self._shown_columns()].copy()
        table["chosen"] = self.stability.reindex(self.curves.index).to_numpy()
        meta = self.metadata
        lines = [
            f"Capacity sweep: {meta.get('ladder_repr', '')} on {meta.get('n_samples', '?')} rows, "
            f"plan {meta.get('plan_repr', '')}, seed {meta.get('seed_entropy', '?')}",
            self._noise_line(),
            "",
            table.to_string(float_format=lambda v: f"{v:.4g}"),
            "",
            "('chosen' = share of replicates in which the rule picks that row)"
            if self.stability.notna().any()
            else f"('chosen': {meta.get('stability_note') or 'not available'})",
            (meta.get("decomposition") or {}).get("relation", ""),
            "",
            f"Recommended {name}: {self.recommended}  (rule '{self.rule}': "
            f"{self.rules.loc[self.rule, 'reason']})",
        ]
        others = self.rules.drop(index=self.rule)
        if len(others):
            lines.append("Other rules:")
            lines += [f"  {r:7s} -> {row.capacity}: {row.reason}" for r, row in others.iterrows()]
        if len(self.failures):
            lines.append("Failed fits:")
            lines += [
                f"  {name} {cap}: {row['count']} failed, first: {row['first_message']}"
                for cap, row in self.failures.iterrows()
            ]
        if self.inclusion is not None and self.recommended in self.inclusion.index:
            shares = self.inclusion.loc[self.recommended].sort_values(ascending=False)
            shares = shares[shares > 0]
            lines.append(
                f"Predictors among the first {self.recommended} across resamples (share): "
                + ", ".join(f"{name} {share:.2f}" for name, share in shares.items())
            )
        if self.notes:
            lines.append("Notes:")
            lines += [f"  - {n}" for n in self.notes]
        lines += ["", caution_text(ladder_kind(self.metadata))]
        return "\n".join(lines)

    @property
    def loss(self) -> str:
        """The loss the test-error curve is measured in (``"squared-error"`` unless chosen).

        Examples
        --------
        >>> import complexity as cx
        >>> X, y = cx.datasets.pressure_sensor()
        >>> cx.sweep(cx.PolynomialLadder(range(0, 3)), X, y, plan=cx.Bootstrap(5), random_state=0).loss
        'squared-error'
        """
        return str(self.metadata.get("loss", "squared-error"))

    def _shown_columns(self) -> list[str]:
        if self.loss != "squared-error":
            return [c for c in self.curves.columns if c != "n_scored"]
        shown = [
            c
            for c in CURVE_COLUMNS
            if c in self.curves and (c != "oob_excess" or self.curves[c].fillna(0).any())
        ]
        return shown + [c for c in ("loocv", "aicc", "bic") if c in self.curves]

    def _noise_line(self) -> str:
        if self.noise is None:
            return f"Loss {self.loss}: {self.metadata.get('loss_split', '')}"
        return f"Noise variance {self.noise.value:.4g} ({self.noise.method}: {self.noise.detail})"

    def _squared_error_only(self, what: str) -> None:
        if self.loss != "squared-error":
            raise ValueError(
                f"{what} are drawn for squared-error sweeps; this result's loss is "
                f"{self.loss!r}. Its curves are in result.curves and result.summary()."
            )

    def predict(
        self,
        x_new: Any,
        X: Any,
        y: Any,
        *,
        capacity: Any = None,
        interval: str = "confidence",
        level: float = 0.95,
        **options: Any,
    ) -> pd.DataFrame:
        """Predictions of the chosen polynomial with a band; see :func:`complexity.bands.predict`.

        ``X`` and ``y`` are the data this result was swept on (a result keeps the curves, not the
        data). ``interval`` is ``"confidence"`` (the mean response), ``"prediction"`` (one new
        reading) or ``"selection"`` (a band that includes choosing the degree). Valid only inside
        the measured range; validate against reference standards; local codes and licensed
        practice decide.

        Examples
        --------
        >>> import complexity as cx
        >>> X, y = cx.datasets.pressure_sensor()
        >>> r = cx.sweep(cx.PolynomialLadder(range(0, 4)), X, y, plan=cx.Bootstrap(10), random_state=0)
        >>> band = r.predict([20.0, 30.0], X, y, interval="prediction")
        >>> bool((band["upper"] > band["lower"]).all())
        True
        """
        from .bands import predict

        return predict(
            self, X, y, x_new, capacity=capacity, interval=interval, level=level, **options
        )

    def inverse_predict(
        self,
        y_new: Any,
        X: Any,
        y: Any,
        *,
        capacity: Any = None,
        level: float = 0.95,
        **options: Any,
    ) -> pd.DataFrame:
        """The input at which the chosen curve gives ``y_new``, with its interval.

        See :func:`complexity.bands.inverse_predict` (calibration use; no extrapolation beyond
        the measured range; validate against reference standards; local codes and licensed
        practice decide).

        Examples
        --------
        >>> import complexity as cx
        >>> import numpy as np
        >>> x = np.linspace(0.0, 10.0, 40)  # synthetic: a gauge reading rising with the load
        >>> y = 2.0 + 0.5 * x + np.random.default_rng(1).normal(0, 0.05, 40)
        >>> r = cx.sweep(cx.PolynomialLadder(range(0, 3)), x, y, plan=cx.Bootstrap(20),
        ...              random_state=0)
        >>> x0 = r.inverse_predict([4.5], x, y)
        >>> round(float(x0["estimate"].iloc[0]), 1)
        5.0
        """
        from .bands import inverse_predict

        return inverse_predict(self, X, y, y_new, capacity=capacity, level=level, **options)

    def __repr__(self) -> str:
        return (
            f"<SweepResult: {self.capacity_name} {list(self.curves.index)}, recommended "
            f"{self.recommended!r} by '{self.rule}'>"
        )

    def _repr_html_(self) -> str:
        shown = [c for c in self.curves.columns if c not in ("n_scored", "failed_fits")]
        reason = html.escape(str(self.rules.loc[self.rule, "reason"]))
        notes = "".join(f"<li>{html.escape(n)}</li>" for n in self.notes)
        return (
            f"<div><p><b>Recommended {html.escape(self.capacity_name)}: "
            f"{html.escape(str(self.recommended))}</b> (rule <code>{html.escape(self.rule)}</code>: "
            f"{reason})</p>"
            f"<p>{html.escape(self._noise_line())}</p>"
            '<div style="overflow-x:auto;max-width:100%">'
            f"{self.curves[shown].to_html(float_format=lambda v: f'{v:.4g}')}</div>"
            f"{'<ul>' + notes + '</ul>' if notes else ''}"
            f"<p><small>{html.escape(caution_text(ladder_kind(self.metadata)))}</small></p></div>"
        )

    def plot(self, view: str = "errors", **options: Any) -> Any:
        """Draw one view of the result; see :func:`complexity.plot.plot` for views and options.

        Returns a :class:`matplotlib.figure.Figure` (needs ``pip install "complexity[plot]"``).

        Examples
        --------
        >>> import complexity as cx
        >>> X, y = cx.datasets.pressure_sensor()
        >>> r = cx.sweep(cx.PolynomialLadder(range(0, 4)), X, y, plan=cx.Bootstrap(10), random_state=0)
        >>> fig = r.plot("errors", y_units="kPa")
        """
        self._squared_error_only("figures")
        from .plot import plot

        return plot(self, view, **options)

    def report(self, path: str | Path, **options: Any) -> Path:
        """Write a self-contained HTML report; see :func:`complexity.report.write_report`.

        Examples
        --------
        >>> import tempfile, pathlib
        >>> import complexity as cx
        >>> X, y = cx.datasets.pressure_sensor()
        >>> r = cx.sweep(cx.PolynomialLadder(range(0, 4)), X, y, plan=cx.Bootstrap(10), random_state=0)
        >>> r.report(pathlib.Path(tempfile.mkdtemp()) / "r.html", X=X, y=y).exists()
        True
        """
        self._squared_error_only("HTML reports")
        from .report import write_report

        return write_report(self, path, **options)

    # ------------------------------------------------------------------ persistence
    def to_dict(self) -> dict[str, Any]:
        """The JSON document described in the module docstring (a plain dict)."""
        caps = [_plain(c) for c in self.curves.index]
        doc = {
            "format": FORMAT,
            "version": VERSION,
            "capacity_name": self.capacity_name,
            "capacities": caps,
            "recommended": _plain(self.recommended),
            "rule": self.rule,
            "curves": {
                "columns": list(self.curves.columns),
                "dtypes": {c: str(self.curves[c].dtype) for c in self.curves},
                "data": {c: [_plain(v) for v in self.curves[c].tolist()] for c in self.curves},
            },
            "rules": [
                {"rule": r, "capacity": _plain(row.capacity), "reason": row.reason}
                for r, row in self.rules.iterrows()
            ],
            "stability": [_plain(v) for v in self.stability.tolist()],
            "noise": None if self.noise is None else self.noise.to_dict(),
            "failures": [
                {
                    "capacity": _plain(cap),
                    "count": int(row["count"]),
                    "first_message": row["first_message"],
                }
                for cap, row in self.failures.iterrows()
            ],
            "notes": list(self.notes),
            "metadata": _plain_tree(self.metadata),
        }
        if self.inclusion is not None:
            doc["inclusion"] = {
                "columns": [str(c) for c in self.inclusion.columns],
                "data": [[float(v) for v in row] for row in self.inclusion.to_numpy()],
            }
        doc["coefficients"] = self._coefficients_document()
        return doc

    def _coefficients_document(self) -> list[dict[str, Any]] | None:
        """Every coefficient table :meth:`coefficients` gives, or the reason it gives none."""
        if not self.coefficient_tables:
            return None
        out: list[dict[str, Any]] = []
        for capacity in list(self.coefficient_tables):
            entry: dict[str, Any] = {"capacity": _plain(capacity)}
            try:
                table = self.coefficients(capacity)
            except (ValueError, ArithmeticError, LookupError) as exc:
                entry["unavailable"] = str(exc)
            else:
                entry.update(
                    index_name=table.index.name,
                    terms=[str(t) for t in table.index],
                    estimate=[float(v) for v in table["estimate"]],
                    std_error=[float(v) for v in table["std_error"]],
                    attrs={str(k): str(v) for k, v in table.attrs.items()},
                )
            out.append(entry)
        return out

    def save(self, path: str | Path) -> Path:
        """Write the result as a JSON document; :func:`load_result` reads it back exactly.

        Exactly means bit for bit: the curves, rules, stability, noise estimate, failures,
        notes, inclusion shares and every coefficient table :meth:`coefficients` can give (a
        table it cannot give is saved as its reason, and asking for it after loading raises
        ``ValueError`` with that reason). Not saved: ``predictions`` (a loaded result has
        ``None``). In ``metadata`` tuples come back as lists and numpy values as plain numbers.

        Examples
        --------
        >>> import tempfile, pathlib
        >>> import complexity as cx
        >>> X, y = cx.datasets.pressure_sensor()
        >>> r = cx.sweep(cx.PolynomialLadder(range(0, 3)), X, y, plan=cx.Bootstrap(10), random_state=1)
        >>> path = r.save(pathlib.Path(tempfile.mkdtemp()) / "sweep.json")
        >>> back = cx.load_result(path)
        >>> back.curves.equals(r.curves), back.coefficients(2).equals(r.coefficients(2))
        (True, True)
        """
        path = Path(path)
        text = json.dumps(_encode(self.to_dict()), indent=1, allow_nan=False)
        path.write_text(text + "\n", encoding="utf-8")
        return path


def _plain(v: Any) -> Any:
    if isinstance(v, np.generic):
        return v.item()
    return v


def _plain_tree(v: Any) -> Any:
    if isinstance(v, dict):
        return {str(k): _plain_tree(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_plain_tree(x) for x in v]
    if isinstance(v, np.ndarray):
        return [_plain_tree(x) for x in v.tolist()]
    return _plain(v)


def _encode(v: Any) -> Any:
    if isinstance(v, float) and not math.isfinite(v):
        return "NaN" if math.isnan(v) else ("Infinity" if v > 0 else "-Infinity")
    if isinstance(v, dict):
        return {k: _encode(x) for k, x in v.items()}
    if isinstance(v, list):
        return [_encode(x) for x in v]
    return v


_SPECIAL = {"NaN": math.nan, "Infinity": math.inf, "-Infinity": -math.inf}


def _decode_column(values: list[Any]) -> list[Any]:
    return [_SPECIAL.get(v, v) if isinstance(v, str) else v for v in values]


def load_result(path: str | Path) -> SweepResult:
    """Read a result written by :meth:`SweepResult.save`.

    Examples
    --------
    See :meth:`SweepResult.save`.
    """
    doc = json.loads(Path(path).read_text(encoding="utf-8"))
    if doc.get("format") != FORMAT:
        raise ValueError(f"{path} is not a saved sweep result (format {doc.get('format')!r}).")
    if doc.get("version") != VERSION:
        raise ValueError(
            f"{path} has result version {doc.get('version')!r}; this library reads {VERSION}."
        )
    index = capacity_index(doc["capacities"], doc["capacity_name"])
    data = {c: _decode_column(doc["curves"]["data"][c]) for c in doc["curves"]["columns"]}
    curves = pd.DataFrame(data, index=index, columns=doc["curves"]["columns"])
    kinds = doc["curves"].get("dtypes", {})
    for c in curves.columns:
        curves[c] = curves[c].astype(np.dtype(kinds.get(c, "float64")))
    rules = pd.DataFrame(doc["rules"], columns=["rule", "capacity", "reason"]).set_index("rule")
    stability = pd.Series(
        np.array(_decode_column(doc["stability"]), dtype=np.float64),
        index=capacity_index(doc["capacities"]),
        name="share_chosen",
    )
    failures = _failures_frame(
        [(f["capacity"], f["count"], f["first_message"]) for f in doc["failures"]],
        doc["capacity_name"],
    )
    inclusion = None
    if doc.get("inclusion") is not None:
        inclusion = pd.DataFrame(
            np.array(doc["inclusion"]["data"], dtype=np.float64).reshape(len(index), -1),
            index=index.copy(),
            columns=doc["inclusion"]["columns"],
        )
    return SweepResult(
        curves=curves,
        recommended=doc["recommended"],
        rule=doc["rule"],
        rules=rules,
        stability=stability,
        noise=None if doc["noise"] is None else NoiseEstimate.from_dict(doc["noise"]),
        failures=failures,
        notes=list(doc["notes"]),
        metadata=doc["metadata"],
        coefficient_tables=_tables_from_document(doc),
        inclusion=inclusion,
    )


_NO_TABLES = (
    "this result has no coefficient tables: they are made for least-squares ladders swept with "
    "the exact engine (and not for designs too large to convert to the user's units)."
)


class _SavedTables(Mapping[Any, pd.DataFrame]):
    """Coefficient tables read back from a saved result; a gap raises its saved reason."""

    def __init__(
        self,
        tables: dict[Any, pd.DataFrame],
        gaps: dict[Any, str],
        order: list[Any] | None = None,
        missing: str | None = None,
    ) -> None:
        self._tables, self._gaps, self.missing = tables, gaps, missing
        self._order = list(order) if order is not None else [*tables, *gaps]

    def __getitem__(self, capacity: Any) -> pd.DataFrame:
        if capacity in self._gaps:
            raise ValueError(self._gaps[capacity])
        return self._tables[capacity]

    def __iter__(self) -> Iterator[Any]:
        return iter(self._order)

    def __len__(self) -> int:
        return len(self._order)


def _tables_from_document(doc: dict[str, Any]) -> Mapping[Any, pd.DataFrame] | None:
    if "coefficients" not in doc:
        return _SavedTables(
            {},
            {},
            missing="this result was saved without its coefficient tables (by an earlier "
            "version of complexity); rerun the sweep to get them.",
        )
    entries = doc["coefficients"]
    if entries is None:
        return None
    tables: dict[Any, pd.DataFrame] = {}
    gaps: dict[Any, str] = {}
    order: list[Any] = []
    for entry in entries:
        capacity = entry["capacity"]
        order.append(capacity)
        if "unavailable" in entry:
            gaps[capacity] = str(entry["unavailable"])
            continue
        table = pd.DataFrame(
            {
                "estimate": np.array(_decode_column(entry["estimate"]), dtype=np.float64),
                "std_error": np.array(_decode_column(entry["std_error"]), dtype=np.float64),
            },
            index=pd.Index(entry["terms"], name=entry.get("index_name")),
        )
        table.attrs.update(entry.get("attrs") or {})
        tables[capacity] = table
    return _SavedTables(tables, gaps, order)


def _failures_frame(rows: list[tuple[Any, int, str]], capacity_name: str) -> pd.DataFrame:
    frame = pd.DataFrame(
        {"count": [int(r[1]) for r in rows], "first_message": [r[2] for r in rows]},
        index=capacity_index([r[0] for r in rows], capacity_name),
    )
    frame["count"] = frame["count"].astype(np.int64)
    return frame
