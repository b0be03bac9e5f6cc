"""Reading the command line's CSV file: the table, its numeric columns, the rows to sweep.

Everything here turns a file on disk into the predictors and target of a sweep, or into one
:class:`~complexity.exceptions.InputError` that names the file, the column, the row and the fix.
Two habits of spreadsheet and data-frame tools are recognised rather than swept as data: a first
column of row labels saved with the table (a data frame's index), and numbers written with a
decimal comma.
"""

from __future__ import annotations

import re
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .exceptions import InputError

__all__ = ["MIN_ROWS", "Selection", "one_line", "read_table", "select_data", "separator_char"]

#: A sweep needs rows to train on and rows to leave out; fewer than this is refused up front.
MIN_ROWS = 5

#: what a shell user types for a tab (the two characters backslash and t, or a word)
_TAB_SPELLINGS = ("\\t", "tab", "TAB", "Tab")

#: a number written with a decimal comma: 1,5 or -0,25 or 1.234,5 or 2,5e-3
_DECIMAL_COMMA = re.compile(r"[+-]?(?:\d{1,3}(?:\.\d{3})+|\d*),\d+(?:[eE][+-]?\d+)?")
#: a number written with a decimal point, when --decimal says commas
_DECIMAL_POINT = re.compile(r"[+-]?\d*\.\d+(?:[eE][+-]?\d+)?")
#: the name pandas gives a first column whose header cell is empty
_UNNAMED_FIRST = re.compile(r"(?:Unnamed: 0(?:\.\d+)?)?")


def one_line(text: object) -> str:
    """``text`` with every run of white space (newlines too) turned into one space.

    Examples
    --------
    >>> one_line("a\\n  b")
    'a b'
    """
    return " ".join(str(text).split())


def separator_char(text: str) -> str:
    """The field separator meant by ``--separator``: ``\\t`` (as typed in a shell) is a tab.

    Examples
    --------
    >>> separator_char("\\\\t") == "\\t", separator_char(";")
    (True, ';')
    """
    return "\t" if text in _TAB_SPELLINGS else text


def read_table(path: Path, separator: str, decimal: str = ".") -> Any:
    """Read ``path`` into a DataFrame (header row, names stripped), or raise :class:`InputError`.

    A separator of more than one character is a regular expression (pandas' rule) and is read by
    pandas' Python parser, chosen here so that pandas does not warn about the choice.
    """
    import pandas as pd

    if not path.exists():
        raise InputError(f"{path}: no such file")
    if path.is_dir():
        raise InputError(f"{path} is a folder, not a CSV file")
    if decimal == separator:
        raise InputError(
            f"--decimal {decimal!r} is also the field separator; files with decimal commas "
            "usually separate fields with ';' (--separator ';')"
        )
    engine = "c" if len(separator) == 1 else "python"
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", pd.errors.ParserWarning)
            frame = pd.read_csv(
                path, sep=separator, decimal=decimal, skipinitialspace=True, engine=engine
            )
    except pd.errors.EmptyDataError:
        raise InputError(f"{path} is empty; expected a CSV file with a header row") from None
    except pd.errors.ParserError as exc:
        first = one_line(str(exc).splitlines()[-1] if str(exc) else exc)
        raise InputError(f"{path} is not a well-formed CSV file ({first})") from None
    except UnicodeDecodeError:
        raise InputError(f"{path} is not a text CSV file (it is not valid UTF-8)") from None
    except OSError as exc:
        raise InputError(f"cannot read {path}: {exc.strerror or exc}") from None
    frame.columns = [str(c).strip() for c in frame.columns]
    if len(frame.columns) < 2:
        raise InputError(
            f"{path} has {len(frame.columns)} column(s); a sweep needs a target column and at least "
            f"one predictor column (is the separator {separator!r} right? see --separator)"
            + _separator_hint(frame.columns, separator)
        )
    return frame


def _separator_hint(columns: Any, separator: str) -> str:
    header = " ".join(str(c) for c in columns)
    for char, spelled in ((";", "';'"), ("\t", "'\\t'")):
        if char != separator and char in header:
            return f"; the header holds {spelled}: try --separator {spelled}"
    return ""


def _number_hint(value: Any, decimal: str) -> str:
    """Why a cell that is not a number may still be one: the wrong decimal mark."""
    text = str(value).strip()
    if decimal != "," and _DECIMAL_COMMA.fullmatch(text):
        return (
            " (a number written with a decimal comma? pass --decimal ',' to read it as "
            f"{text.replace('.', '').replace(',', '.')})"
        )
    if decimal == "," and _DECIMAL_POINT.fullmatch(text):
        return f" (a decimal point, but --decimal is {decimal!r}; drop --decimal to read it)"
    return ""


def _numeric_column(frame: Any, name: str, path: Path, decimal: str) -> Any:
    import pandas as pd

    column = frame[name]
    if pd.api.types.is_bool_dtype(column):
        raise InputError(f"column {name!r} in {path} holds true/false values; it must be numeric")
    if pd.api.types.is_numeric_dtype(column):
        return column.astype("float64")
    if decimal == ".":
        converted = pd.to_numeric(column, errors="coerce")
        bad = converted.isna() & column.notna()
    else:  # with decimal commas, '1.234' may mean 1234: never read it as 1.234
        text = column.astype(str)
        converted = pd.to_numeric(text.str.replace(decimal, ".", regex=False), errors="coerce")
        bad = (converted.isna() | text.str.contains(".", regex=False)) & column.notna()
    if bad.any():
        row = int(bad.to_numpy().nonzero()[0][0])
        value = column.iloc[row]
        raise InputError(
            f"column {name!r} in {path} is not numeric: data row {row + 1} holds "
            f"{value!r}{_number_hint(value, decimal)}"
        )
    return converted.astype("float64")


def _counts_rows(values: Any) -> str | None:
    """``"0..n-1"`` or ``"1..n"`` when ``values`` are exactly the row numbers, else None."""
    import numpy as np
    import pandas as pd

    if not pd.api.types.is_integer_dtype(values) or pd.api.types.is_bool_dtype(values):
        return None
    held = values.to_numpy()
    for start in (0, 1):
        if np.array_equal(held, np.arange(start, start + held.size)):
            return f"{start}..{start + held.size - 1}"
    return None


def index_like_first_column(frame: Any) -> tuple[str, str] | None:
    """The first column when it holds row labels rather than a measurement, and why.

    A data frame saved with its index (``DataFrame.to_csv`` without ``index=False``) starts with
    a column whose header cell is empty (pandas reads it as ``Unnamed: 0``) holding one distinct
    label per row. Swept as a predictor, it lets the row order into the model.

    Returns
    -------
    (name, reason) or None

    Examples
    --------
    >>> import pandas as pd
    >>> frame = pd.DataFrame({"Unnamed: 0": [0, 1, 2], "x": [1.0, 2.0, 4.0]})
    >>> index_like_first_column(frame)
    ('Unnamed: 0', 'it has no header and holds the row numbers 0..2')
    >>> index_like_first_column(frame.rename(columns={"Unnamed: 0": "day"})) is None
    True
    """
    import pandas as pd

    if frame.shape[1] == 0 or frame.shape[0] == 0:
        return None
    name = str(frame.columns[0])
    if not _UNNAMED_FIRST.fullmatch(name):
        return None
    column = frame.iloc[:, 0]
    if column.isna().any() or not column.is_unique:
        return None
    counted = _counts_rows(column)
    if counted is not None:
        return name, f"it has no header and holds the row numbers {counted}"
    types = pd.api.types
    if (
        types.is_integer_dtype(column)
        or types.is_object_dtype(column)
        or types.is_string_dtype(column)
    ):
        return name, "it has no header and holds a different label on every row"
    return None  # distinct fractional numbers under a blank header: more likely a measurement


@dataclass
class Selection:
    """The predictors and target to sweep, and what was left out on the way.

    Attributes
    ----------
    X : pandas.DataFrame
        The predictor columns, as floats.
    y : pandas.Series
        The target column, as floats.
    dropped : int
        Rows left out for empty cells (``--skip-incomplete``).
    notes : list of str
        One line each about what was read differently from the file's face value.
    """

    X: Any
    y: Any
    dropped: int = 0
    notes: list[str] = field(default_factory=list)


def _check_names(columns: list[str], path: Path, target: str, predictors: list[str] | None) -> None:
    shown = ", ".join(repr(c) for c in columns[:12]) + (" ..." if len(columns) > 12 else "")
    if target not in columns:
        raise InputError(f"target column {target!r} is not in {path}; its columns are {shown}")
    if predictors is None:
        return
    missing = [p for p in predictors if p not in columns]
    if missing:
        raise InputError(
            f"predictor column(s) {', '.join(repr(m) for m in missing)} not in {path}; "
            f"its columns are {shown}"
        )
    if target in predictors:
        raise InputError(f"column {target!r} is the target; it cannot also be a predictor")
    if len(set(predictors)) != len(predictors):
        raise InputError("a predictor column is named twice in --predictors")


def _default_predictors(frame: Any, target: str, keep_index: bool, notes: list[str]) -> list[str]:
    """Every column but the target, less a first column of row labels unless it is kept."""
    predictors = [c for c in frame.columns if c != target]
    found = index_like_first_column(frame)
    if found is None or found[0] == target:
        return predictors
    name, reason = found
    if keep_index:
        notes.append(f"kept the first column {name!r} as a predictor ({reason})")
        return predictors
    kept = [c for c in predictors if c != name]
    if not kept:
        raise InputError(
            f"the only column besides the target, {name!r}, looks like a saved row index ({reason}); "
            "pass --keep-index-column to sweep it anyway"
        )
    notes.append(
        f"left out the first column {name!r}: {reason}, which looks like a saved row index, not "
        "a measurement (--keep-index-column keeps it)"
    )
    return kept


def select_data(
    frame: Any,
    path: Path,
    target: str,
    predictors: list[str] | None,
    skip_incomplete: bool,
    *,
    decimal: str = ".",
    keep_index: bool = False,
) -> Selection:
    """The predictors (DataFrame) and target (Series) to sweep, checked and made numeric.

    With ``predictors=None`` every other column is a predictor, except a first column that
    :func:`index_like_first_column` finds (unless ``keep_index``); the notes say so.
    """
    import pandas as pd

    _check_names(list(frame.columns), path, target, predictors)
    notes: list[str] = []
    defaulted = predictors is None
    if predictors is None:
        predictors = _default_predictors(frame, target, keep_index, notes)
    data = {}
    for name in [*predictors, target]:
        try:
            data[name] = _numeric_column(frame, name, path, decimal)
        except InputError as exc:
            if defaulted and name != target:
                raise InputError(f"{exc}; choose the predictor columns with --predictors") from None
            raise
    table = pd.DataFrame(data)
    incomplete = table.isna().any(axis=1)
    dropped = int(incomplete.sum())
    if dropped and not skip_incomplete:
        first = int(incomplete.to_numpy().nonzero()[0][0])
        empty = [c for c in table.columns if pd.isna(table.iloc[first][c])]
        raise InputError(
            f"{path} has {dropped} row(s) with empty cells in the chosen columns (first: data row "
            f"{first + 1}, column {empty[0]!r}); fill them, or pass --skip-incomplete to leave "
            "those rows out"
        )
    table = table.loc[~incomplete]
    if len(table) < MIN_ROWS:
        raise InputError(
            f"{path} has {len(table)} complete row(s); a sweep needs at least {MIN_ROWS} "
            "(some to train on, some to leave out)"
        )
    if dropped:
        notes.append(f"left out {dropped} row(s) with empty cells")
    return Selection(table[predictors], table[target], dropped, notes)
