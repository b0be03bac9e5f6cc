"""Reader for the NIST StRD linear least-squares files in tests/data (private test helper).

The format is described in tests/data/README.md: CRLF text; the header's "File Format" lines give
the 1-based line ranges of the certified values and of the data; numbers are Fortran style
(``0.3348E-02``, ``.11019``); the response is the first data column.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

DATA_DIR = Path(__file__).parent / "data"

NAMES = (
    "Norris",
    "Pontius",
    "NoInt1",
    "NoInt2",
    "Filip",
    "Longley",
    "Wampler1",
    "Wampler2",
    "Wampler3",
    "Wampler4",
    "Wampler5",
)

_RANGE = re.compile(r"(Certified Values|Data)\s+\(lines\s+(\d+)\s+to\s+(\d+)\)")
_PARAM = re.compile(r"^\s*B(\d+)\s+(\S+)\s+(\S+)\s*$")
_RESID_SD = re.compile(r"^\s*Standard Deviation\s+(\S+)\s*$")


@dataclass(frozen=True)
class NistCase:
    """One StRD data set with its certified values."""

    name: str
    y: np.ndarray  # (n,)
    X: np.ndarray  # (n, n_predictors)
    params: tuple[int, ...]  # parameter indices, e.g. (0, 1, 2) or (1,) without intercept
    coef: np.ndarray  # certified estimates, in the order of params
    coef_sd: np.ndarray  # certified standard deviations
    residual_sd: float

    @property
    def intercept(self) -> bool:
        return 0 in self.params

    @property
    def polynomial_degree(self) -> int | None:
        """Degree of the certified polynomial model in one predictor with intercept, else None."""
        if self.X.shape[1] == 1 and self.intercept:
            return len(self.params) - 1
        return None


def _number(text: str) -> float:
    """Parse a Fortran-style number (``1.2E-02``, ``.5``, ``1.2D-02``)."""
    return float(text.replace("D", "E").replace("d", "e"))


def load(name: str) -> NistCase:
    """Parse ``tests/data/<name>.dat``."""
    raw = (DATA_DIR / f"{name}.dat").read_bytes().decode("ascii")
    lines = raw.split("\r\n")
    ranges = {m.group(1): (int(m.group(2)), int(m.group(3))) for m in _RANGE.finditer(raw)}
    c0, c1 = ranges["Certified Values"]
    d0, d1 = ranges["Data"]

    params, est, sd, resid_sd = [], [], [], None
    for line in lines[c0 - 1 : c1]:
        m = _PARAM.match(line)
        if m:
            params.append(int(m.group(1)))
            est.append(_number(m.group(2)))
            sd.append(_number(m.group(3)))
            continue
        m = _RESID_SD.match(line)
        if m:
            resid_sd = _number(m.group(1))
    if resid_sd is None or not params:
        raise ValueError(f"{name}: certified values not found in lines {c0}..{c1}")

    rows = [[_number(t) for t in line.split()] for line in lines[d0 - 1 : d1]]
    data = np.array(rows, dtype=np.float64)
    header = lines[d0 - 2].split()
    if header[0] != "Data:" or data.shape[1] != len(header) - 1:
        raise ValueError(f"{name}: data header {header!r} does not match {data.shape[1]} columns")
    return NistCase(
        name=name,
        y=data[:, 0],
        X=data[:, 1:],
        params=tuple(params),
        coef=np.array(est),
        coef_sd=np.array(sd),
        residual_sd=float(resid_sd),
    )


def lre(computed: np.ndarray | float, certified: np.ndarray | float) -> np.ndarray:
    """NIST log relative error, -log10(|q - c| / |c|), or -log10|q - c| when c = 0.

    Definition from tests/data/README.md (NIST StRD). An exact match gives +inf.
    """
    q = np.atleast_1d(np.asarray(computed, dtype=np.float64))
    c = np.atleast_1d(np.asarray(certified, dtype=np.float64))
    err = np.abs(q - c)
    rel = np.where(c != 0, err / np.where(c != 0, np.abs(c), 1.0), err)
    with np.errstate(divide="ignore"):
        return -np.log10(rel)


def digits(values: np.ndarray) -> float:
    """Smallest LRE of a set, capped at 15 (certified values carry 15 significant digits)."""
    return float(min(15.0, np.min(values))) if len(values) else math.inf
