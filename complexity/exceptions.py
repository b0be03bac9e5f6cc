"""Every warning and error class the library raises, in one place.

Each is also importable from the top-level package (``complexity.CapacityWarning`` and so on).
Keeping them here lets any module warn or raise without importing the stage that usually does.
"""

from __future__ import annotations

__all__ = [
    "CapacityWarning",
    "CheckpointMismatchError",
    "ExtrapolationWarning",
    "InputError",
    "SweepFailedError",
]


class SweepFailedError(RuntimeError):
    """Raised when every fit at every capacity failed.

    Examples
    --------
    >>> from complexity.exceptions import SweepFailedError
    >>> issubclass(SweepFailedError, RuntimeError)
    True
    """


class CapacityWarning(UserWarning):
    """A capacity is fragile on this data (e.g. it interpolates, or fits failed).

    Examples
    --------
    >>> import warnings
    >>> from complexity.exceptions import CapacityWarning
    >>> with warnings.catch_warnings(record=True) as caught:
    ...     warnings.simplefilter("always")
    ...     warnings.warn("degree 9 interpolates the data", CapacityWarning)
    >>> caught[0].category.__name__
    'CapacityWarning'
    """


class ExtrapolationWarning(UserWarning):
    """A prediction was asked for outside the range of the data the model was chosen on.

    Examples
    --------
    >>> from complexity.exceptions import ExtrapolationWarning
    >>> issubclass(ExtrapolationWarning, UserWarning)
    True
    """


class CheckpointMismatchError(ValueError):
    """A checkpoint folder holds work from a different sweep (data, ladder, plan, seed, ...).

    Examples
    --------
    >>> import tempfile
    >>> import complexity as cx
    >>> X, y = cx.datasets.pressure_sensor()
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     _ = cx.sweep(cx.PolynomialLadder(range(0, 3)), X, y, plan=cx.Bootstrap(5),
    ...                  random_state=0, checkpoint=folder)
    ...     try:
    ...         cx.sweep(cx.PolynomialLadder(range(0, 3)), X, y, plan=cx.Bootstrap(5),
    ...                  random_state=1, checkpoint=folder)
    ...     except CheckpointMismatchError as exc:
    ...         print("seed: stored" in str(exc))
    True
    """


class InputError(Exception):
    """A command-line input (file, column, option) cannot be used; the message says why.

    Examples
    --------
    >>> from complexity.exceptions import InputError
    >>> str(InputError("column 'T' not found"))
    "column 'T' not found"
    """
