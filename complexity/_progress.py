"""A small text progress bar that counts fits (no third-party dependency).

``sweep(..., progress=True)`` draws it on stderr; the command line turns it on by default when
stderr is a terminal. Engines report finished fits from the main process (after each chunk of
work comes back from joblib), so the count is right for any ``n_jobs`` and any joblib backend.
"""

from __future__ import annotations

import sys
import threading
import time
from typing import TextIO

__all__: list[str] = []


def _clock(seconds: float) -> str:
    """``75.2`` -> ``"1:15"``; ``3725`` -> ``"1:02:05"``."""
    s = max(0, round(seconds))
    hours, rest = divmod(s, 3600)
    minutes, secs = divmod(rest, 60)
    return f"{hours}:{minutes:02d}:{secs:02d}" if hours else f"{minutes}:{secs:02d}"


class FitCounter:
    """Count finished fits and, when enabled, draw a one-line bar on a stream.

    The line reads ``fits [##########..........]  120/400  30%  0:04 left``; it is redrawn in
    place (carriage return) at most every ``min_interval`` seconds and once more at the end.
    Nothing at all is written when ``enabled`` is False.

    Parameters
    ----------
    total : int
        Number of fits expected (>= 0).
    enabled : bool
        Draw the bar; when False every method does nothing visible.
    stream : text stream, optional
        Where to draw (default: ``sys.stderr`` at construction time).
    width : int, default=30
        Characters in the bar.
    min_interval : float, default=0.1
        Least time between two redraws, in seconds (0.1 s on a terminal; use a larger value for
        log files).

    Examples
    --------
    >>> import io
    >>> from complexity._progress import FitCounter
    >>> out = io.StringIO()
    >>> with FitCounter(4, True, stream=out) as counter:
    ...     counter.update(2)
    ...     counter.update(2)
    >>> "4/4" in out.getvalue()
    True
    """

    def __init__(
        self,
        total: int,
        enabled: bool,
        stream: TextIO | None = None,
        width: int = 30,
        min_interval: float = 0.1,
    ) -> None:
        total = int(total)
        if total < 0:
            raise ValueError(f"total must be a count of fits >= 0; got {total!r}.")
        self.total = total
        self.enabled = bool(enabled)
        self.stream = stream if stream is not None else sys.stderr
        self.width = max(int(width), 1)
        self.min_interval = float(min_interval)
        self.done = 0
        self.closed = False
        self._lock = threading.Lock()
        self._start = time.perf_counter()
        self._last_draw = -float("inf")
        self._last_len = 0
        self._drawn = -1  # the count shown by the last draw
        if self.enabled:
            self._draw(force=True)

    def __enter__(self) -> FitCounter:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def update(self, n: int) -> None:
        """Add ``n`` finished fits (safe to call from several threads)."""
        with self._lock:
            if self.closed:
                return
            self.done = min(self.total, self.done + max(int(n), 0))
            if self.enabled:
                self._draw(force=self.done >= self.total)

    def line(self) -> str:
        """The text of the bar as it would be drawn now."""
        elapsed = time.perf_counter() - self._start
        frac = self.done / self.total if self.total else 1.0
        filled = min(self.width, int(frac * self.width))
        bar = "#" * filled + "." * (self.width - filled)
        digits = len(str(self.total))
        if 0 < frac < 1:
            tail = f"{_clock(elapsed / frac - elapsed)} left"
        elif frac >= 1:
            tail = f"done in {_clock(elapsed)}"
        else:
            tail = "starting"
        return f"fits [{bar}] {self.done:>{digits}}/{self.total} {frac:4.0%}  {tail}"

    def _draw(self, force: bool = False) -> None:
        now = time.perf_counter()
        if not force and now - self._last_draw < self.min_interval:
            return
        self._last_draw = now
        self._drawn = self.done
        text = self.line()
        pad = " " * max(0, self._last_len - len(text))  # wipe the rest of a longer line
        self._last_len = len(text)
        try:
            self.stream.write(f"\r{text}{pad}")
            self.stream.flush()
        except (OSError, ValueError):  # a closed or broken stream must not stop the sweep
            self.enabled = False

    def close(self) -> None:
        """Draw the final state and end the line (only once; nothing when disabled)."""
        with self._lock:
            if self.closed:
                return
            self.closed = True
            if self.enabled:
                if self._drawn != self.done:
                    self._draw(force=True)
                try:
                    self.stream.write("\n")
                    self.stream.flush()
                except (OSError, ValueError):
                    pass
