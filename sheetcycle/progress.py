"""A plain-text progress bar on stderr for runs that take a while.

It shows only when the stream is a terminal (or ``enabled=True``), never with
``enabled=False`` (--quiet), and only once the run has lasted ``min_seconds``: short runs
print nothing at all. Redraws with a carriage return, at most ten times a second, and ends
with a newline. No dependencies.
"""

from __future__ import annotations

import sys
import time
from collections.abc import Callable
from types import TracebackType
from typing import TextIO

__all__ = ["Progress"]

_WIDTH = 28
_REDRAW_SECONDS = 0.1


class Progress:
    """``with Progress(total, label="rows") as bar: ... bar.update(n)``."""

    def __init__(
        self,
        total: int,
        *,
        label: str,
        stream: TextIO | None = None,
        enabled: bool | None = None,
        min_seconds: float = 2.0,
        clock: Callable[[], float] = time.monotonic,
    ) -> None:
        self.total = max(int(total), 0)
        self.label = label
        self.stream = sys.stderr if stream is None else stream
        if enabled is None:
            isatty = getattr(self.stream, "isatty", None)
            enabled = bool(isatty()) if callable(isatty) else False
        self.enabled = enabled
        self.min_seconds = min_seconds
        self._clock = clock
        self.done = 0
        self.shown = False
        self._start = 0.0
        self._last_draw = -float("inf")
        self._last_len = 0
        self._last_text = ""

    def __enter__(self) -> Progress:
        self._start = self._clock()
        return self

    def update(self, n: int = 1) -> None:
        """Count ``n`` more items done and redraw when it is time to."""
        self.done = min(self.done + n, self.total) if self.total else self.done + n
        if not self.enabled:
            return
        now = self._clock()
        if now - self._start < self.min_seconds:
            return
        if self.shown and now - self._last_draw < _REDRAW_SECONDS and self.done < self.total:
            return
        self._draw(now)

    def line(self) -> str:
        """The bar as it would be drawn now, e.g. 'rows [#######-----] 250/1000  25%'."""
        if self.total:
            frac = self.done / self.total
            filled = round(frac * _WIDTH)
            bar = "#" * filled + "-" * (_WIDTH - filled)
            return f"{self.label} [{bar}] {self.done}/{self.total} {frac:4.0%}"
        return f"{self.label} {self.done}"

    def _draw(self, now: float) -> None:
        text = self.line()
        pad = " " * max(self._last_len - len(text), 0)
        self.stream.write("\r" + text + pad)
        self.stream.flush()
        self._last_len = len(text)
        self._last_text = text
        self._last_draw = now
        self.shown = True

    def __exit__(
        self,
        exc_type: type[BaseException] | None,
        exc: BaseException | None,
        tb: TracebackType | None,
    ) -> None:
        if self.shown:
            if self.line() != self._last_text:
                self._draw(self._clock())
            self.stream.write("\n")
            self.stream.flush()
