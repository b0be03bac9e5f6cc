"""A small text progress bar that counts fits (no third-party dependency)."""

from __future__ import annotations

import sys
import time
from typing import TextIO

__all__: list[str] = []


class FitCounter:
    """Count finished fits and, when enabled, draw ``[#####.....] 120/400 fits`` on a stream.

    Updates are called from the main process (after each chunk of work), so the count is correct
    with any number of workers. Nothing is printed when ``enabled`` is False.
    """

    def __init__(self, total: int, enabled: bool, stream: TextIO | None = None, width: int = 30) -> None:
        self.total = max(int(total), 0)
        self.enabled = bool(enabled)
        self.stream = stream if stream is not None else sys.stderr
        self.width = width
        self.done = 0
        self._start = time.perf_counter()
        self._last_draw = 0.0
        if self.enabled:
            self._draw(force=True)

    def update(self, n: int) -> None:
        self.done = min(self.total, self.done + int(n))
        if self.enabled:
            self._draw(force=self.done >= self.total)

    def _draw(self, force: bool = False) -> None:
        now = time.perf_counter()
        if not force and now - self._last_draw < 0.1:
            return
        self._last_draw = now
        frac = self.done / self.total if self.total else 1.0
        filled = int(round(frac * self.width))
        elapsed = now - self._start
        eta = elapsed / frac - elapsed if 0 < frac < 1 else 0.0
        bar = "#" * filled + "." * (self.width - filled)
        tail = f" {eta:5.0f}s left" if 0 < frac < 1 else f" {elapsed:5.1f}s"
        self.stream.write(f"\r[{bar}] {self.done}/{self.total} fits{tail}")
        self.stream.flush()

    def close(self) -> None:
        if self.enabled:
            self._draw(force=True)
            self.stream.write("\n")
            self.stream.flush()
