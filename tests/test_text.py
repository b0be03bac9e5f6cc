"""Shared words (complexity._text) and the one-way flow of the presentation stages.

result -> figures (plot and its private modules) -> report: a later stage never imports an
earlier one at run time (``if TYPE_CHECKING:`` imports do not run and do not count), and the
shared words sit below all three.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

from complexity._text import (
    CAUTION,
    caution_text,
    cautions,
    ladder_kind,
    plan_words,
    reader_words,
)

PACKAGE = Path(__file__).resolve().parents[1] / "complexity"
FIGURES = ["plot", "report", "_figures_base", "_figures_curves", "_figures_conditioning",
           "_figures_fits"]  # fmt: skip


def _runtime_imports(module: str) -> set[str]:
    """Package modules imported by ``module`` anywhere (functions too), except under
    ``if TYPE_CHECKING:``."""
    tree = ast.parse((PACKAGE / f"{module}.py").read_text(encoding="utf-8"))
    found: set[str] = set()

    def visit(node: ast.AST) -> None:
        if isinstance(node, ast.If) and getattr(node.test, "id", None) == "TYPE_CHECKING":
            for child in node.orelse:
                visit(child)
            return
        if isinstance(node, ast.ImportFrom) and node.level == 1:
            found.add((node.module or "").split(".")[0])
            if not node.module:
                found.update(a.name for a in node.names)
        elif isinstance(node, ast.ImportFrom) and (node.module or "").startswith("complexity."):
            found.add(node.module.split(".")[1])
        elif isinstance(node, ast.Import):
            found.update(
                a.name.split(".")[1] for a in node.names if a.name.startswith("complexity.")
            )
        for child in ast.iter_child_nodes(node):
            visit(child)

    visit(tree)
    return found


def test_the_walk_sees_imports_and_skips_type_checking_blocks():
    # the walker must find real edges or the tests below could never fail
    assert "_text" in _runtime_imports("result")
    assert "plot" in _runtime_imports("result")  # SweepResult.plot imports it lazily: allowed
    assert "_figures_curves" in _runtime_imports("report")
    text = (PACKAGE / "plot.py").read_text(encoding="utf-8")
    assert "from .result import SweepResult" in text  # present, but only for type checking


@pytest.mark.parametrize("module", FIGURES)
def test_figures_and_report_never_import_the_result_module(module):
    assert "result" not in _runtime_imports(module)


def test_the_shared_words_import_no_presentation_stage():
    assert not _runtime_imports("_text") & {"result", "plot", "report", *FIGURES}


def test_figures_do_not_import_the_report():
    for module in FIGURES:
        if module != "report":
            assert "report" not in _runtime_imports(module), module


def test_cautions_carry_the_three_points_in_both_wordings():
    # the binding cautions: no extrapolation, reference standards, local codes and practice
    for kind in ("polynomial", "features", None):
        items = cautions(kind, "x from 0 to 1")
        joined = " ".join(items)
        assert "outside the measured range of the predictors: x from 0 to 1" in joined
        assert "reference standards" in joined
        assert "Local codes and licensed practice decide" in joined
        paragraph = caution_text(kind)
        assert "outside the measured range" in paragraph and "reference standards" in paragraph
        assert "local codes and licensed practice decide" in paragraph
    assert "polynomial" in " ".join(cautions("polynomial", "x"))
    assert "polynomial" not in " ".join(cautions("features", "x")).lower()
    assert caution_text("features") == CAUTION


def test_reader_words_replace_attribute_references():
    assert reader_words("3 fit(s) failed at degree 9, 10; see result.failures.") == (
        "3 fit(s) failed at degree 9, 10; see the table of failed fits."
    )
    assert reader_words("see `result.noise.detail` and result.notes") == (
        "see the noise estimate and these notes"
    )
    assert reader_words("result.something_new") == "the sections of this report"
    assert reader_words("a result. Then more") == "a result. Then more"  # prose is left alone


def test_metadata_readers_tolerate_missing_entries():
    assert ladder_kind({"ladder": {"kind": "features"}}) == "features"
    assert ladder_kind({"ladder": None}) is None and ladder_kind(None) is None
    assert plan_words({"plan": {"kind": "cross-validation"}}) == "test error (held-out folds)"
    assert plan_words({}) == "test error"
