"""Words shared by the summary, the figures and the report: column order, cautions, labels.

A lower stage than :mod:`complexity.result`, :mod:`complexity.plot` and
:mod:`complexity.report`: it imports none of them, so all three can use it and data keep flowing
one way (result -> figures -> report).
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from typing import Any

__all__ = [
    "CAUTION",
    "CURVE_COLUMNS",
    "capacity_words",
    "caution_text",
    "cautions",
    "ladder_kind",
    "plan_words",
    "reader_words",
]

#: the main curve columns in display order: the summary table shows these when present
#: (``oob_excess`` only where it is not zero); the report's curves table starts with them
CURVE_COLUMNS: tuple[str, ...] = (
    "train_mse",
    "test_mse",
    "test_mse_se",
    "bias_sq",
    "variance",
    "oob_excess",
    "noise",
)

#: The caution for any ladder, in one paragraph (the polynomial wording is
#: ``caution_text("polynomial")``).
CAUTION = (
    "Caution: a recommended capacity describes this data set only. Do not use the fitted model "
    "outside the measured range of the predictors (flexible models can change quickly beyond "
    "the data). Where the result feeds a sensor calibration or any safety-relevant use, validate "
    "the model against reference standards; local codes and licensed practice decide."
)

_CAUTION_POLYNOMIAL = (
    "Caution: a recommended degree describes this data set only. Do not use the fitted "
    "polynomial outside the measured range of the predictors (polynomials diverge quickly beyond "
    "the data). Where the result feeds a sensor calibration or any safety-relevant use, validate "
    "the calibration against reference standards; local codes and licensed practice decide."
)

# the report's list: one sentence group per caution, {ranges} filled in with the measured range
_CAUTIONS_POLYNOMIAL: tuple[str, ...] = (
    "Do not use the fitted polynomial outside the measured range of the predictors: {ranges}. "
    "Polynomials bend away quickly beyond the data, and the resampling that chose the degree "
    "never saw those values.",
    "Validate a calibration polynomial against reference standards before it is used. This "
    "analysis chooses how high a degree one data set supports; it does not establish "
    "traceability or the uncertainty of the calibration.",
    "Local codes and licensed practice decide wherever the result feeds a sensor calibration or "
    "a safety-relevant, legal or contractual use. A recommendation from this library is an input "
    "to that judgement, not a replacement for it.",
)

_CAUTIONS_GENERAL: tuple[str, ...] = (
    "Do not use the fitted model outside the measured range of the predictors: {ranges}. The "
    "resampling that chose the capacity never saw other values, and flexible models can change "
    "quickly beyond the data.",
    "Validate the model against reference standards (or independent data of known quality) "
    "before it is used, above all where it feeds a sensor calibration. This analysis chooses how "
    "much capacity one data set supports; it does not establish traceability or the uncertainty "
    "of the predictions.",
    "Local codes and licensed practice decide wherever the result feeds a safety-relevant, legal "
    "or contractual use. A recommendation from this library is an input to that judgement, not "
    "a replacement for it.",
)


def ladder_kind(metadata: Mapping[str, Any] | Any) -> str | None:
    """The ladder kind recorded in a result's metadata (``"polynomial"``, ``"features"``, ...).

    Examples
    --------
    >>> ladder_kind({"ladder": {"kind": "polynomial", "degrees": [0, 1]}})
    'polynomial'
    >>> ladder_kind({}) is None
    True
    """
    if not isinstance(metadata, Mapping):
        return None
    desc = metadata.get("ladder")
    kind = desc.get("kind") if isinstance(desc, Mapping) else None
    return str(kind) if kind is not None else None


def caution_text(kind: str | None) -> str:
    """The one-paragraph caution for a ladder kind (polynomial wording for ``"polynomial"``).

    Examples
    --------
    >>> "polynomial" in caution_text("polynomial"), "polynomial" in caution_text("features")
    (True, False)
    """
    return _CAUTION_POLYNOMIAL if kind == "polynomial" else CAUTION


def cautions(kind: str | None, ranges: str) -> tuple[str, ...]:
    """The report's cautions for a ladder kind, with the measured range written in.

    Examples
    --------
    >>> first = cautions("polynomial", "x from 0 to 1")[0]
    >>> first.startswith("Do not use the fitted polynomial outside the measured range")
    True
    >>> "x from 0 to 1" in first
    True
    """
    texts = _CAUTIONS_POLYNOMIAL if kind == "polynomial" else _CAUTIONS_GENERAL
    return tuple(t.format(ranges=ranges) for t in texts)


def capacity_words(capacity_name: str) -> str:
    """Plain words for a capacity axis (``"degree"`` -> ``"polynomial degree"``).

    Examples
    --------
    >>> capacity_words("n_features")
    'number of predictors'
    """
    return {"degree": "polynomial degree", "n_features": "number of predictors"}.get(
        capacity_name, capacity_name
    )


def plan_words(metadata: Mapping[str, Any] | Any) -> str:
    """What the test error of a plan is measured on, in words.

    Examples
    --------
    >>> plan_words({"plan": {"kind": "bootstrap"}})
    'test error (out-of-bag)'
    """
    plan = metadata.get("plan") if isinstance(metadata, Mapping) else None
    kind = plan.get("kind") if isinstance(plan, Mapping) else None
    return {
        "bootstrap": "test error (out-of-bag)",
        "cross-validation": "test error (held-out folds)",
        "splitter": "test error (held-out rows)",
        "simulation": "test error (new data from the model)",
    }.get(str(kind), "test error")


# a note written for Python users names attributes; the report names its own sections instead
_ATTRIBUTE_WORDS: dict[str, str] = {
    "failures": "the table of failed fits",
    "notes": "these notes",
    "noise": "the noise estimate",
    "curves": "the curves table",
    "rules": "the table of rules",
    "stability": "the stability figure",
    "inclusion": "the table of predictors in the chosen model",
    "recommended": "the recommendation",
    "coefficients": "the coefficients of the full-data fit",
    "metadata": "the reproducibility section",
}

_ATTRIBUTE = re.compile(r"`?\bresult\.([A-Za-z_]+)(?:\.[A-Za-z_]+)*(?:\(\S*?\))?`?")


def reader_words(text: str) -> str:
    """``text`` with references to Python attributes (``result.failures``) put in words.

    Examples
    --------
    >>> reader_words("2 fit(s) failed at degree 9; see result.failures.")
    '2 fit(s) failed at degree 9; see the table of failed fits.'
    >>> reader_words("the reason is in `result.noise.detail`")
    'the reason is in the noise estimate'
    """

    def words(match: re.Match[str]) -> str:
        return _ATTRIBUTE_WORDS.get(match.group(1), "the sections of this report")

    return _ATTRIBUTE.sub(words, text)


def noise_of(result: Any) -> Any:
    """The result's noise estimate; a sweep under another loss has none and is refused here.

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> noise_of(SimpleNamespace(noise=1.0, metadata={}))
    1.0
    """
    if result.noise is None:
        raise ValueError(
            f"this is a {result.metadata.get('loss', 'non-squared-error')} sweep: it has no noise "
            "estimate, and figures, reports and bands are for squared-error sweeps."
        )
    return result.noise
