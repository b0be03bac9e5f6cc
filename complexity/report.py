"""The HTML report of a sweep: one self-contained file a reviewer can open anywhere.

Everything is inside the file: the style sheet, and every figure as a base64-encoded PNG. There
are no scripts, fonts or links to fetch, so the report opens offline and can be archived with the
calibration record it supports.

Sections: recommendation (with the reason of every rule), figures, the curves table, the data
summary, the noise estimate and its method, failures and notes, cautions (once, worded for the
ladder at hand), reproducibility (seed, plan, ladder, library versions, the call and the command
line). The text speaks of the report's own sections, never of Python attributes.

The report is a later stage than :mod:`complexity.result`: it reads a result by its shape and
never imports that module at run time.
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
import math
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from ._figures_base import check_result
from ._figures_curves import _errors_off_scale, _negative_bias, _negative_bias_words
from ._report_calibration import calibration_section
from ._reproduce import python_call, run_versions
from ._text import CURVE_COLUMNS, capacity_words, cautions, ladder_kind, noise_of, reader_words
from ._validation import _short_repr, check_X_y

if TYPE_CHECKING:  # pragma: no cover
    from .ladders import Ladder
    from .result import SweepResult

__all__ = ["render_report", "write_report"]

_COLUMN_WORDS: dict[str, str] = {
    "train_mse": "training error: mean squared error of the model fitted on all data",
    "test_mse": "test error: mean squared error on rows left out of training",
    "test_mse_se": "standard error of the test error",
    "bias_sq": "squared bias (test error part due to a too simple model), at the training size stated below",
    "oob_excess": "extra variance of models fitted on bootstrap samples over models fitted on all rows (bootstrap only)",
    "bias_sq_plus_noise": "squared bias plus noise (what resampling measures without a noise estimate)",
    "variance": "variance (test error part due to sensitivity to the training set), at the training size stated below",
    "noise": "noise variance (error no model can remove)",
    "test_mse_632": "the .632 bootstrap estimate of test error",
    "test_mse_632plus": "the .632+ bootstrap estimate of test error",
    "n_scored": "rows scored out of training at least once",
    "failed_fits": "fits that failed",
    "loocv": "leave-one-out error (PRESS / n)",
    "gcv": "generalized cross-validation",
    "aic": "Akaike information criterion",
    "aicc": "AIC with small-sample correction",
    "bic": "Bayesian information criterion",
    "cp": "Mallows' Cp",
    "fixed_design_variance": "variance of the fitted values averaged over the observed x "
    "(fixed design, closed form)",
    "condition_number": "2-norm condition number of the design at that capacity",
    "max_abs_coefficient": "largest absolute coefficient of the full-data fit, on the "
    "library's stable basis",
    "n_params": "number of fitted coefficients",
}

_MAIN_COLUMNS: tuple[str, ...] = (
    *CURVE_COLUMNS,
    "bias_sq_plus_noise",
    "test_mse_632",
    "test_mse_632plus",
)

_CSS = """
body{font-family:system-ui,-apple-system,"Segoe UI",Roboto,sans-serif;color:#1d1d1d;margin:0;
background:#fafaf7;line-height:1.45}
main{max-width:980px;margin:0 auto;padding:24px 28px 48px;background:#fff;
border-left:1px solid #e4e4de;border-right:1px solid #e4e4de}
h1{font-size:1.55rem;margin:.2em 0 .1em}
h2{font-size:1.12rem;margin:2em 0 .5em;padding-bottom:.2em;border-bottom:2px solid #0072B2}
.lead{color:#555;margin-top:0}
.verdict{border-left:6px solid #D55E00;background:#fdf3ec;padding:12px 16px;margin:18px 0}
.verdict .big{font-size:1.3rem;font-weight:700}
.scroll{overflow-x:auto;max-width:100%}
table{border-collapse:collapse;font-size:.86rem;margin:.4em 0 1em}
th,td{padding:3px 9px;border-bottom:1px solid #e6e6e6;text-align:right;vertical-align:top}
td{white-space:nowrap}
td.text{white-space:normal;overflow-wrap:anywhere;min-width:12em}
th{background:#f2f2ee;font-weight:600;overflow-wrap:anywhere;hyphens:auto}
td.text,th.text{text-align:left}
tr.chosen td{background:#fdf3ec;font-weight:600}
figure{margin:1.2em 0}
figure img{max-width:100%;height:auto;border:1px solid #ececec}
figcaption{font-size:.85rem;color:#555}
.caution{border:1px solid #E69F00;background:#fffaf0;padding:10px 16px}
code,pre{font-family:ui-monospace,SFMono-Regular,Menlo,Consolas,monospace;font-size:.84rem}
pre{background:#f4f4f0;padding:10px;white-space:pre-wrap;word-break:break-word}
dl{display:grid;grid-template-columns:max-content auto;gap:2px 16px}
dt{font-weight:600}dd{margin:0}
small{color:#666}
"""

_FIGURE_CAPTIONS: dict[str, str] = {
    "errors": "Training error and test error against capacity. The band is ±1 standard error of "
    "the test error; the dashed line marks the recommended capacity.",
    "parts": "The test error split into noise (which no model removes), squared bias (too simple "
    "a model) and variance (too much sensitivity to the particular training set), for the "
    "training size stated under the recommendation. For the bootstrap a fourth part, the "
    "out-of-bag excess, is the extra variance of models fitted on bootstrap samples.",
    "fits": "The data with the curves fitted on all of it at the recommended capacity and its "
    "neighbours. The band holds the middle 90% of refits on bootstrap resamples. Shaded: outside "
    "the measured range, where no fitted curve should be used.",
    "stability": "How often each capacity would be chosen when the data are resampled. A tall "
    "single bar means the choice is settled; several bars mean neighbouring capacities are "
    "about as good.",
    "conditioning": "How well-determined the fitted coefficients are: a growing condition number "
    "means the design columns are close to dependent and coefficients become unstable. The "
    "solid line is the stable basis the fits use.",
}


def _esc(value: Any) -> str:
    return html.escape(str(value), quote=True)


def _num(value: Any, digits: int = 4) -> str:
    if isinstance(value, (bool, np.bool_)):
        return str(value)
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, (float, np.floating)):
        v = float(value)
        if math.isnan(v):
            return "–"
        if math.isinf(v):
            return "∞" if v > 0 else "−∞"
        return f"{v:.{digits}g}"
    return str(value)


def _table(
    frame: pd.DataFrame,
    *,
    chosen: Any = None,
    index_name: str | None = None,
    text_columns: tuple[str, ...] = (),
) -> str:
    head = [f'<th class="text">{_esc(index_name or frame.index.name or "")}</th>']
    head += [
        f'<th class="text">{_esc(c)}</th>' if c in text_columns else f"<th>{_esc(c)}</th>"
        for c in frame.columns
    ]
    rows = []
    for key, row in frame.iterrows():
        cls = ' class="chosen"' if chosen is not None and (key is chosen or key == chosen) else ""
        cells = [f'<td class="text">{_esc(key)}</td>']
        for c in frame.columns:
            v = row[c]
            if c in text_columns:
                cells.append(f'<td class="text">{_esc(v)}</td>')
            else:
                cells.append(f"<td>{_esc(_num(v))}</td>")
        rows.append(f"<tr{cls}>{''.join(cells)}</tr>")
    return (
        f'<div class="scroll"><table><thead><tr>{"".join(head)}</tr></thead>'
        f"<tbody>{''.join(rows)}</tbody></table></div>"
    )


def _inclusion_section(result: SweepResult) -> str:
    """Which predictors the recommended count holds, and how often each was among the first k."""
    inclusion = getattr(result, "inclusion", None)
    if inclusion is None or result.recommended not in inclusion.index:
        return ""
    share = inclusion.loc[result.recommended].sort_values(ascending=False, kind="stable")
    table = pd.DataFrame({"share of resamples among the first k": share.to_numpy()})
    table.index = pd.Index([str(v) for v in share.index], name="predictor")
    k = result.recommended
    always = [str(v) for v, sh in share.items() if sh >= 1.0]
    lead = f"The chosen model uses the first {k} predictor(s) of each training set's order." + (
        f" Every resample included: {', '.join(always)}." if always else ""
    )
    return f"<h3>Predictors in the chosen model</h3><p>{_esc(lead)}</p>" + _table(
        table, index_name="predictor"
    )


def _ranges_text(result: SweepResult, names: list[str]) -> str:
    ranges = result.metadata.get("x_range") or []
    parts = [f"{name} from {_num(lo)} to {_num(hi)}" for name, (lo, hi) in zip(names, ranges)]
    return "; ".join(parts) if parts else "the range of the data"


def _feature_names(result: SweepResult, X: Any) -> list[str]:
    names = result.metadata.get("feature_names")
    if names:
        return [str(n) for n in names]
    if isinstance(X, pd.DataFrame):
        return [str(c) for c in X.columns]
    k = int(result.metadata.get("n_features") or 0)
    return [f"x{i}" for i in range(k)]


def _data_section(
    result: SweepResult, X: Any, y: Any, names: list[str], x_units: str | None, y_units: str | None
) -> str:
    meta = result.metadata
    items = [
        ("rows", _num(meta.get("n_samples", "?"))),
        ("predictors", f"{_num(meta.get('n_features', '?'))}: {', '.join(names)}"),
        ("plan", str(meta.get("plan_repr", ""))),
        ("ladder", str(meta.get("ladder_repr", ""))),
        ("engine", str(meta.get("engine", ""))),
    ]
    body = "<dl>" + "".join(f"<dt>{_esc(k)}</dt><dd>{_esc(v)}</dd>" for k, v in items) + "</dl>"
    if X is not None and y is not None:
        data = check_X_y(X, y)
        y_name = y.name if isinstance(y, pd.Series) and y.name is not None else "response"
        columns = {**{n: data.X[:, i] for i, n in enumerate(names)}, str(y_name): data.y}
        rows = []
        for n, v in columns.items():
            units = y_units if n == str(y_name) else (x_units if len(names) == 1 else None)
            rows.append(
                {
                    "column": n,
                    "units": units or "",
                    "min": v.min(),
                    "max": v.max(),
                    "mean": v.mean(),
                    "SD": v.std(ddof=1) if v.size > 1 else math.nan,
                    "distinct values": int(np.unique(v).size),
                }
            )
        frame = pd.DataFrame(rows).set_index("column")
        body += _table(frame, index_name="column", text_columns=("units",))
        distinct_rows = int(np.unique(data.X, axis=0).shape[0])
        if distinct_rows < data.X.shape[0]:
            body += (
                f"<p>{data.X.shape[0]} rows at {distinct_rows} distinct predictor settings: "
                "repeated settings (replicates) measure the noise directly.</p>"
            )
    else:
        ranges = _ranges_text(result, names)
        body += f"<p>Measured range: {_esc(ranges)}.</p>"
    return body


def _noise_section(result: SweepResult, y_units: str | None) -> str:
    est = noise_of(result)
    sd = math.sqrt(est.value) if est.value >= 0 else math.nan
    unit = f" {y_units}" if y_units else ""
    unit2 = f" ({y_units})²" if y_units else ""
    words = {
        "replicates": "pooled spread of repeated readings at identical predictor settings (pure error)",
        "differences": "differences of neighbouring responses along one ordered predictor",
        "neighbours": "differences between each row and its nearest neighbour in predictor space",
        "given": "given by the caller (or known, for a simulation)",
    }.get(est.method, est.method)
    df = "–" if est.df is None else _num(est.df)
    return (
        "<dl>"
        f"<dt>noise variance</dt><dd>{_esc(_num(est.value))}{_esc(unit2)}</dd>"
        f"<dt>noise SD</dt><dd>{_esc(_num(sd))}{_esc(unit)}</dd>"
        f"<dt>method</dt><dd><code>{_esc(est.method)}</code>: {_esc(words)}</dd>"
        f"<dt>degrees of freedom</dt><dd>{_esc(df)}</dd>"
        f"<dt>detail</dt><dd>{_esc(reader_words(est.detail))}</dd>"
        "</dl>"
        "<p><small>Squared bias is what remains of the test error after variance and this noise "
        "estimate are taken out, so it inherits the uncertainty of the estimate.</small></p>"
    )


def _caption(name: str, result: SweepResult, X: Any) -> str:
    """The figure's caption, with what this result's figure shows beyond the usual."""
    text = _FIGURE_CAPTIONS.get(name, "")
    if name == "errors":
        off = _errors_off_scale(result)
        if off:
            text += (
                " To keep the region of the choice readable the axis is cut; values off the "
                "scale are drawn as triangles at its edge: " + "; ".join(off) + "."
            )
    elif name == "parts":
        negative = _negative_bias(result)
        if negative:
            text += " Marked with a cross: " + _negative_bias_words(result, negative) + "."
    elif name == "conditioning" and X is not None and ladder_kind(result.metadata) == "polynomial":
        text += (
            " The dashed line is what the raw power design (1, x, x², … on the measured x, "
            "columns scaled to unit length) would have had; the library does not fit on it."
        )
    return text


def _figure_html(name: str, fig: Any, caption: str) -> str:
    from .plot import figure_png

    data = base64.b64encode(figure_png(fig)).decode("ascii")
    return (
        f'<figure id="figure-{_esc(name)}"><img alt="{_esc(name)} figure" '
        f'src="data:image/png;base64,{data}"><figcaption>{_esc(caption)}</figcaption></figure>'
    )


def render_report(
    result: SweepResult,
    *,
    X: Any = None,
    y: Any = None,
    ladder: Ladder | None = None,
    x_units: str | None = None,
    y_units: str | None = None,
    title: str | None = None,
    command: str | None = None,
    band_resamples: int = 100,
    views: Sequence[str] | None = None,
) -> str:
    """The report as one HTML string (see :func:`write_report` for the parameters).

    Examples
    --------
    >>> import complexity as cx
    >>> from complexity.report import render_report
    >>> X, y = cx.datasets.pressure_sensor()
    >>> r = cx.sweep(cx.PolynomialLadder(range(0, 4)), X, y, plan=cx.Bootstrap(10), random_state=0)
    >>> page = render_report(r, X=X, y=y, band_resamples=10)
    >>> page.startswith("<!DOCTYPE html>")
    True
    """
    from .plot import figures

    check_result(result)
    for name, value in (
        ("x_units", x_units),
        ("y_units", y_units),
        ("title", title),
        ("command", command),
    ):
        if value is not None and not isinstance(value, str):
            raise TypeError(f"{name} must be a string or None; got {_short_repr(value)}.")
    meta = result.metadata
    words = capacity_words(result.capacity_name)
    names = _feature_names(result, X)
    title = title or f"How much capacity does this data support? ({words})"

    figs = figures(
        result,
        X=X,
        y=y,
        ladder=ladder,
        x_units=x_units,
        y_units=y_units,
        band_resamples=band_resamples,
        views=views,
    )
    figure_html = "".join(
        _figure_html(name, fig, _caption(name, result, X)) for name, fig in figs.items()
    )
    skipped = ""
    if "fits" not in figs and (views is None or "fits" in views):
        skipped = (
            "<p><small>The fitted-curve view is drawn when the report is given the data "
            "(X and y) of a sweep with one predictor.</small></p>"
        )

    rules = result.rules.copy()
    rules["capacity"] = [str(v) for v in rules["capacity"]]
    rules["reason"] = [reader_words(str(v)) for v in rules["reason"]]
    reason = reader_words(str(result.rules.loc[result.rule, "reason"]))
    pos = list(result.curves.index).index(result.recommended)
    chosen_share = result.stability.reindex(result.curves.index).to_numpy(dtype=np.float64)[pos]
    share_text = (
        f"Chosen in {chosen_share:.0%} of replicates."
        if np.isfinite(chosen_share)
        else result.metadata.get("stability_note") or "Selection stability is not available."
    )
    split = result.metadata.get("decomposition") or {}
    if split:  # plain text: the template escapes it
        share_text += (
            f" {split.get('relation', '')} Standard error of the test error: "
            f"{split.get('test_mse_se', '')}."
        )
    share_text = reader_words(share_text)
    main_columns = [c for c in _MAIN_COLUMNS if c in result.curves]
    curves = result.curves[main_columns].copy()
    curves["chosen (share)"] = result.stability.reindex(result.curves.index).to_numpy()
    rest = [c for c in result.curves.columns if c not in main_columns]
    more = ""
    if rest:
        more = "<h3>Counts, closed-form criteria and diagnostics</h3>" + _table(
            result.curves[rest], chosen=result.recommended, index_name=result.capacity_name
        )
    legend = "".join(
        f"<li><code>{_esc(c)}</code>: {_esc(_COLUMN_WORDS[c])}</li>"
        for c in result.curves.columns
        if c in _COLUMN_WORDS
    )
    failures = ""
    if len(result.failures):
        failures = "<h3>Failed fits</h3>" + _table(
            result.failures, index_name=result.capacity_name, text_columns=("first_message",)
        )
    chosen_predictors = _inclusion_section(result)
    notes = ""
    if result.notes:
        notes = (
            "<h3>Notes</h3><ul>"
            + "".join(f"<li>{_esc(reader_words(n))}</li>" for n in result.notes)
            + "</ul>"
        )
    kind = ladder_kind(meta)
    caution_items = "".join(
        f"<li>{_esc(c)}</li>" for c in cautions(kind, _ranges_text(result, names))
    )
    versions = run_versions(result)
    repro = [
        ("seed", meta.get("seed_entropy", "?")),
        ("random_state", meta.get("random_state")),
        ("plan", meta.get("plan_repr", "")),
        ("resamples", meta.get("n_resamples", "")),
        ("ladder", meta.get("ladder_repr", "")),
        ("rule", result.rule),
        ("noise", noise_of(result).method),
        ("engine", meta.get("engine", "")),
        ("sweep time", f"{meta.get('run_seconds', '?')} s"),
        ("library versions", ", ".join(f"{k} {v}" for k, v in versions.items())),
    ]
    repro_html = (
        "<dl>" + "".join(f"<dt>{_esc(k)}</dt><dd>{_esc(v)}</dd>" for k, v in repro) + "</dl>"
    )
    repro_html += f"<p>The call (same X and y):</p><pre>import complexity as cx\n{_esc(python_call(result))}</pre>"
    if command:
        repro_html += f"<p>The command line:</p><pre>{_esc(command)}</pre>"
    made = _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    calibration = calibration_section(
        result, X, y, table=_table, figure=_figure_html, esc=_esc, y_units=y_units
    )

    return f"""<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{_esc(title)}</title>
<style>{_CSS}</style>
</head>
<body><main>
<h1>{_esc(title)}</h1>
<p class="lead">Capacity sweep over resampled training sets: {_esc(meta.get("n_samples", "?"))} rows,
{_esc(meta.get("plan_repr", ""))}, rule <code>{_esc(result.rule)}</code>. Report made {_esc(made)}.</p>

<section id="recommendation">
<div class="verdict"><div class="big">Recommended {_esc(words)}: {_esc(result.recommended)}</div>
<div>Rule <code>{_esc(result.rule)}</code>: {_esc(reason)}. {_esc(share_text)}</div></div>
<h2>Every rule and its reason</h2>
{_table(rules, chosen=result.rule, index_name="rule", text_columns=("capacity", "reason"))}
{chosen_predictors}
</section>

<section id="figures">
<h2>Figures</h2>
{figure_html}
{skipped}
</section>

<section id="curves">
<h2>The curves</h2>
{_table(curves, chosen=result.recommended, index_name=result.capacity_name)}
{more}
<ul>{legend}<li><code>chosen (share)</code>: share of replicates in which the rule picks that row</li></ul>
{failures}
{notes}
</section>

{calibration}

<section id="data">
<h2>The data</h2>
{_data_section(result, X, y, names, x_units, y_units)}
</section>

<section id="noise">
<h2>Noise estimate</h2>
{_noise_section(result, y_units)}
</section>

<section id="cautions">
<h2>Cautions</h2>
<div class="caution"><ul>{caution_items}</ul></div>
</section>

<section id="reproducibility">
<h2>Reproducibility</h2>
{repro_html}
</section>
</main></body>
</html>
"""


def write_report(
    result: SweepResult,
    path: str | Path,
    *,
    X: Any = None,
    y: Any = None,
    ladder: Ladder | None = None,
    x_units: str | None = None,
    y_units: str | None = None,
    title: str | None = None,
    command: str | None = None,
    band_resamples: int = 100,
    views: Sequence[str] | None = None,
) -> Path:
    """Write a self-contained HTML report of a sweep.

    Parameters
    ----------
    result : SweepResult
    path : str or Path
        The file to write (UTF-8 HTML).
    X, y : array-like, optional
        The data of the sweep: adds a data summary and, for one predictor, the fitted curves.
    ladder : Ladder, optional
        The ladder of the sweep, when the fitted-curve view cannot rebuild it from the result.
    x_units, y_units : str, optional
        Units of the predictor(s) and the response, e.g. ``"°C"`` and ``"kPa"``.
    title : str, optional
        The report's heading.
    command : str, optional
        The command line that produced the result, shown under Reproducibility.
    band_resamples : int, default=100
        Bootstrap refits behind the band of the fitted-curve view.
    views : sequence of str, optional
        The figures to include (default: every view that applies; see
        :data:`complexity.plot.VIEWS`).

    Returns
    -------
    Path
        The path written.

    Raises
    ------
    ImportError
        When matplotlib is not installed (``pip install "complexity[plot]"``).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> import complexity as cx
    >>> X, y = cx.datasets.pressure_sensor()
    >>> r = cx.sweep(cx.PolynomialLadder(range(0, 4)), X, y, plan=cx.Bootstrap(10), random_state=0)
    >>> out = r.report(pathlib.Path(tempfile.mkdtemp()) / "report.html", X=X, y=y, y_units="kPa")
    >>> out.suffix
    '.html'
    """
    if not isinstance(path, (str, Path)):
        raise TypeError(f"path must be a str or pathlib.Path; got {_short_repr(path)}.")
    page = render_report(
        result,
        X=X,
        y=y,
        ladder=ladder,
        x_units=x_units,
        y_units=y_units,
        title=title,
        command=command,
        band_resamples=band_resamples,
        views=views,
    )
    path = Path(path)
    path.write_text(page, encoding="utf-8")
    return path
