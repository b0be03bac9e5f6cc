"""What the report's reproducibility section states: the call that repeats a sweep, the versions.

Private: :mod:`complexity.report` shows these (``complexity.report.python_call`` stays importable
from there).
"""

from __future__ import annotations

import platform
from typing import TYPE_CHECKING

from ._text import noise_of
from ._versions import package_version

if TYPE_CHECKING:
    from .result import SweepResult

__all__ = ["python_call", "run_versions"]


def run_versions(result: SweepResult) -> dict[str, str]:
    """The versions the sweep recorded, plus matplotlib's (the figures) and Python's.

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> sorted(run_versions(SimpleNamespace(metadata={"versions": {"numpy": "2.0"}})))
    ['matplotlib', 'numpy', 'python']
    """
    versions = dict(result.metadata.get("versions") or {})
    versions.setdefault("matplotlib", package_version("matplotlib", missing="not installed"))
    versions.setdefault("python", platform.python_version())
    return versions


def python_call(result: SweepResult) -> str:
    """The ``cx.sweep(...)`` call that repeats this sweep on the same X and y.

    Examples
    --------
    >>> import complexity as cx
    >>> from complexity.report import python_call
    >>> X, y = cx.datasets.pressure_sensor()
    >>> r = cx.sweep(cx.PolynomialLadder(range(0, 3)), X, y, plan=cx.Bootstrap(5), random_state=7)
    >>> python_call(r)
    "cx.sweep(cx.PolynomialLadder(degrees=[0, 1, 2], domain=None), X, y, plan=cx.Bootstrap(n_resamples=5), noise='replicates', rule='one-se', random_state=7)"
    """
    meta = result.metadata
    ladder = meta.get("ladder_repr", "<ladder>")
    plan = meta.get("plan_repr", "<plan>")
    est = noise_of(result)
    noise = est.value if est.method == "given" else est.method
    seed = meta.get("random_state")
    if seed is None:
        seed = meta.get("seed_entropy")
    prefix = "" if str(ladder).startswith("<") else "cx."
    plan_prefix = "" if str(plan).startswith("<") or "(" not in str(plan) else "cx."
    if meta.get("plan", {}).get("kind") == "splitter":
        plan_prefix = ""
    parts = [
        f"{prefix}{ladder}",
        "X",
        "y",
        f"plan={plan_prefix}{plan}",
        f"noise={noise!r}",
        f"rule={result.rule!r}",
        f"random_state={seed!r}",
    ]
    if meta.get("engine") not in (
        None,
        "auto",
        "exact",
        "exact-ridge",
        "exact-ranked",
        "generic",
    ):  # pragma: no cover
        parts.append(f"engine={meta['engine']!r}")
    return "cx.sweep(" + ", ".join(parts) + ")"
