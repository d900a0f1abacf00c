"""A one-line progress bar on stderr for long checks; silent unless stderr is a terminal."""

from __future__ import annotations

import os
import sys
import time

__all__ = ["ProgressLine"]


class ProgressLine:
    """``progress(name, fraction, text)`` callable that redraws one line at most 10 times/s."""

    def __init__(self, stream=None, width: int = 24):
        self.stream = stream or sys.stderr
        self.width = width
        self._last = 0.0
        self._shown = False

    @staticmethod
    def wanted(stream=None) -> bool:
        stream = stream or sys.stderr
        return stream.isatty() and not os.environ.get("CI")

    def __call__(self, name: str, fraction: float, text: str) -> None:
        now = time.monotonic()
        if now - self._last < 0.1 and fraction < 1:
            return
        self._last = now
        filled = int(self.width * min(max(fraction, 0.0), 1.0))
        bar = "#" * filled + "." * (self.width - filled)
        self.stream.write(f"\r  {name:<22} [{bar}] {text}\033[K")
        self.stream.flush()
        self._shown = True

    def clear(self, *_args) -> None:
        if self._shown:
            self.stream.write("\r\033[K")
            self.stream.flush()
            self._shown = False
