"""HTML report: one self-contained file with figures, recommendation, cautions, reproducibility."""

from __future__ import annotations

import base64
import dataclasses
import re
import warnings
from html.parser import HTMLParser

import matplotlib

matplotlib.use("Agg")

import pandas as pd
import pytest

import complexity as cx
from complexity._text import cautions
from complexity.report import python_call, render_report, write_report

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification (ISO/IEC 15948), section 5.2
# HTML void elements (WHATWG HTML standard, section 13.1.2): they have no end tag
VOID = {
    "area",
    "base",
    "br",
    "col",
    "embed",
    "hr",
    "img",
    "input",
    "link",
    "meta",
    "source",
    "track",
    "wbr",
}


class _Page(HTMLParser):
    """Collect tags, attributes and text; check that every element is closed in order."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.stack: list[str] = []
        self.tags: list[tuple[str, dict[str, str | None]]] = []
        self.text: list[str] = []
        self.errors: list[str] = []
        self.doctype = None

    def handle_decl(self, decl: str) -> None:
        self.doctype = decl

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))
        if tag not in VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes {self.stack[-1:] or 'nothing'}")
            return
        self.stack.pop()

    def handle_data(self, data):
        self.text.append(data)

    @property
    def plain(self) -> str:
        return " ".join(" ".join(self.text).split())


def _parse(page: str) -> _Page:
    parser = _Page()
    parser.feed(page)
    parser.close()
    assert parser.errors == []
    assert parser.stack == []
    assert parser.doctype and parser.doctype.lower() == "doctype html"
    return parser


@pytest.fixture(scope="module")
def data():
    return cx.datasets.pressure_sensor()


@pytest.fixture(scope="module")
def result(data):
    X, y = data
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        return cx.sweep(
            cx.PolynomialLadder(range(0, 7)), X, y, plan=cx.Bootstrap(20), random_state=11
        )


@pytest.fixture(scope="module")
def page(result, data, tmp_path_factory):
    X, y = data
    path = tmp_path_factory.mktemp("report") / "sensor.html"
    out = result.report(
        path, X=X, y=y, x_units="°C", y_units="kPa", command="complexity demo", band_resamples=20
    )
    assert out == path
    return path.read_text(encoding="utf-8")


def test_report_parses_and_embeds_every_figure(page, result):
    parsed = _parse(page)
    images = [attrs for tag, attrs in parsed.tags if tag == "img"]
    expected = ["errors", "parts", "fits", "stability"]
    if any("cond" in c or "coef" in c for c in result.curves.columns):
        expected.append("conditioning")
    expected.append("profile")  # the calibration section: a polynomial sweep given its data
    assert [a["alt"] for a in images] == [f"{v} figure" for v in expected]
    for attrs in images:
        prefix = "data:image/png;base64,"
        assert attrs["src"].startswith(prefix)
        assert base64.b64decode(attrs["src"][len(prefix) :], validate=True).startswith(
            PNG_SIGNATURE
        )
    figure_ids = [a.get("id") for t, a in parsed.tags if t == "figure"]
    assert figure_ids == [f"figure-{v}" for v in expected]


def test_report_is_self_contained(page):
    parsed = _parse(page)
    assert (
        "http://" not in page
        and "https://" not in page
        and "//" not in re.sub(r"data:[^\"]+", "", page)
    )
    tags = {t for t, _ in parsed.tags}
    assert not tags & {"script", "link", "iframe", "object", "embed"}
    for _, attrs in parsed.tags:
        for key in ("src", "href"):
            if key in attrs:
                assert attrs[key].startswith("data:")


def test_report_has_recommendation_rules_and_noise(page, result):
    text = _parse(page).plain
    assert f"Recommended polynomial degree: {result.recommended}" in text
    for rule, row in result.rules.iterrows():
        assert " ".join(str(row.reason).split()) in text, rule
    assert result.noise.method in text
    assert f"{result.noise.value:.4g}" in text
    assert "(kPa)²" in text  # noise variance in the squared response unit


def _cautions_text(page: str) -> str:
    section = re.search(r'<section id="cautions">(.*?)</section>', page, flags=re.S)
    assert section
    return " ".join(re.sub(r"<[^>]+>", " ", section.group(1)).split())


def test_report_has_the_cautions_once_worded_for_polynomials(page):
    # issue 12 item 8: one cautions block, in the words of the ladder at hand
    text = _parse(page).plain
    assert "outside the measured range of the predictors: temperature_c from -20 to 60" in text
    for phrase in ("reference standards", "Local codes and licensed practice decide"):
        assert text.count(phrase) == 1, phrase
    block = _cautions_text(page)
    expected = cautions("polynomial", "temperature_c from -20 to 60")
    assert len(expected) == 3
    for sentence in expected:
        assert " ".join(sentence.split()) in block
    assert "fitted polynomial" in block and "calibration polynomial" in block


def test_report_cautions_for_other_ladders_speak_of_the_model(tmp_path):
    # scikit-learn's bundled diabetes data: a feature-count ladder is not a calibration polynomial
    from sklearn.datasets import load_diabetes

    X, y = load_diabetes(return_X_y=True, as_frame=True)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        r = cx.sweep(cx.FeatureLadder(range(1, 4)), X, y, plan=cx.CrossValidation(3))
    block = _cautions_text(render_report(r, views=["errors"]))
    assert "polynomial" not in block.lower()
    assert "Do not use the fitted model outside the measured range" in block
    assert "reference standards" in block and "Local codes and licensed practice decide" in block


def test_report_text_names_its_own_sections_not_python_attributes(data, tmp_path):
    # issue 12 item 8: a failed fit's note says "see result.failures" in Python; not in the report
    from sklearn.base import BaseEstimator, RegressorMixin

    class Brittle(RegressorMixin, BaseEstimator):
        def __init__(self, depth=1):
            self.depth = depth

        def fit(self, X, y):
            if self.depth == 3:
                raise ValueError("cannot fit at depth 3")
            self.mean_ = float(y.mean())
            return self

        def predict(self, X):
            return [self.mean_] * len(X)

    X, y = data
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        r = cx.sweep(
            cx.ParamLadder(Brittle(), "depth", [1, 2, 3], simpler="low"),
            X,
            y,
            plan=cx.CrossValidation(3),
            random_state=0,
        )
    assert len(r.failures) and any("result.failures" in n for n in r.notes)
    page = render_report(r, views=["errors"])
    # everything but the reproducible call (which is Python on purpose)
    prose = re.sub(r"<pre>.*?</pre>", "", page, flags=re.S)
    assert not re.search(r"\bresult\.[a-z_]", _parse(prose).plain)
    assert "see the table of failed fits" in _parse(page).plain


def test_report_reproducibility_block(page, result, data):
    text = _parse(page).plain
    assert "seed 11" in text and "random_state 11" in text
    assert "Bootstrap(n_resamples=20)" in text
    for pkg in ("numpy", "scikit-learn", "matplotlib"):
        assert pkg in text
    assert "complexity demo" in text
    assert python_call(result) in text


def test_python_call_repeats_the_sweep(result, data):
    # the call written into the report is real code: running it gives the same curves
    X, y = data
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        again = eval(python_call(result), {"cx": cx, "X": X, "y": y})
    pd.testing.assert_frame_equal(again.curves, result.curves)
    assert again.recommended == result.recommended


def test_report_tables_scroll_and_wrap_within_the_page(page):
    # issue 12 item 8: the wide curves table must not run past the page: every table sits in a
    # box that scrolls sideways, headers wrap, and text cells wrap
    assert page.count("<table>") == page.count('<div class="scroll"><table>')
    css = re.search(r"<style>(.*?)</style>", page, flags=re.S).group(1)
    assert ".scroll{overflow-x:auto;max-width:100%}" in css
    assert re.search(r"th\{[^}]*overflow-wrap:anywhere", css)
    assert re.search(r"td\.text\{[^}]*white-space:normal", css)
    curves = re.search(r'<section id="curves">(.*?)</section>', page, flags=re.S).group(1)
    assert curves.lstrip().split("\n", 2)[1].startswith('<div class="scroll"><table>')


def test_report_captions_say_what_is_off_the_scale_and_below_zero(data):
    X, y = data
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        r = cx.sweep(cx.PolynomialLadder(range(0, 8)), X, y, plan=cx.Bootstrap(50), random_state=0)
    curves = r.curves.copy()
    curves.loc[7, ["test_mse", "test_mse_se"]] = [1e9, 1e8]
    r = dataclasses.replace(r, curves=curves)
    page = render_report(r, X=X, views=["errors", "parts", "conditioning"])
    captions = dict(
        re.findall(r'<figure id="figure-(\w+)">.*?<figcaption>(.*?)</figcaption>', page)
    )
    assert "test error above the axis at polynomial degree 7 (up to 1e+09)" in captions["errors"]
    negative = ", ".join(str(c) for c in r.curves.index[r.curves["bias_sq"] < 0])
    assert (
        negative
        and f"squared bias estimated below zero at polynomial degree {negative}"
        in (captions["parts"])
    )
    assert "raw power design" in captions["conditioning"]


def test_report_curves_table_marks_the_recommended_row(page, result):
    rows = re.findall(r'<tr class="chosen"><td class="text">([^<]*)</td>', page)
    assert str(result.recommended) in rows  # the curves table
    assert result.rule in rows  # the rules table
    for column in ("train_mse", "test_mse", "bias_sq", "variance", "noise"):
        assert f"<th>{column}</th>" in page


def test_report_without_data_has_no_fit_figure(result, tmp_path):
    base = dataclasses.replace(
        result,
        curves=result.curves.drop(columns=[c for c in result.curves if "cond" in c or "coef" in c]),
    )
    path = write_report(base, tmp_path / "plain.html", band_resamples=0)
    parsed = _parse(path.read_text(encoding="utf-8"))
    assert [a["alt"] for t, a in parsed.tags if t == "img"] == [
        "errors figure",
        "parts figure",
        "stability figure",
    ]
    assert "Measured range: temperature_c from -20 to 60" in parsed.plain


def test_report_of_a_loaded_result(result, tmp_path):
    loaded = cx.load_result(result.save(tmp_path / "r.json"))
    page = render_report(loaded, views=["errors"])
    assert f"Recommended polynomial degree: {loaded.recommended}" in _parse(page).plain


def test_report_escapes_user_text(result, tmp_path):
    page = render_report(
        result,
        title="<b>bench & co</b>",
        command="complexity sweep 'a<b>.csv'",
        views=("stability",),
    )
    assert page.count("<img") == 1
    assert "<b>bench" not in page and "&lt;b&gt;bench &amp; co&lt;/b&gt;" in page
    _parse(page)


def test_report_bad_arguments(result):
    with pytest.raises(TypeError, match="path must be"):
        write_report(result, 42)
    with pytest.raises(TypeError, match="y_units must be"):
        render_report(result, y_units=3)
    with pytest.raises(TypeError, match="SweepResult"):
        render_report("result")
    with pytest.raises(ValueError, match="views"):
        render_report(result, views=["pie"])


def test_feature_count_report_names_the_chosen_predictors(tmp_path):
    # scikit-learn's bundled diabetes data; the fixed column order, so the first k are known
    from sklearn.datasets import load_diabetes

    X, y = load_diabetes(return_X_y=True, as_frame=True)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = cx.sweep(cx.FeatureLadder(range(1, 5)), X, y, plan=cx.Bootstrap(10))
    html_text = result.report(tmp_path / "r.html").read_text(encoding="utf-8")
    assert "Predictors in the chosen model" in html_text
    first = list(X.columns[: result.recommended])
    assert f"Every resample included: {', '.join(first)}." in html_text


def test_calibration_section_bands_match_the_bands_module(result):
    # the section's numbers are the bands module's own (checked there against statsmodels)
    from complexity import bands, datasets
    from complexity.report import render_report

    X, y = datasets.pressure_sensor()
    page = render_report(result, X=X, y=y, band_resamples=5)
    assert 'id="calibration"' in page and "no extrapolation" in page
    low, high = result.metadata["x_range"][0]
    band = bands.predict(result, X, y, [low, high], interval="prediction")
    for value in band["upper"]:
        assert f"{value:.4g}" in page


def test_no_calibration_section_without_the_data(result):
    from complexity.report import render_report

    assert 'id="calibration"' not in render_report(result, band_resamples=5)
