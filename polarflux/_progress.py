"""A small progress bar for long batches, drawn only on a terminal."""

from __future__ import annotations

import sys
import time
from typing import TextIO


class Progress:
    """Progress of ``total`` items on ``stream`` (stderr), redrawn at most 10 times a second.

    Off when the stream is not a terminal, so logs and pipes stay clean.
    """

    def __init__(self, total: int, label: str = "", stream: TextIO | None = None, enabled: bool | None = None):
        self.total = max(int(total), 0)
        self.done = 0
        self.failed = 0
        self.label = label
        self.stream = stream if stream is not None else sys.stderr
        isatty = getattr(self.stream, "isatty", lambda: False)
        self.enabled = isatty() if enabled is None else enabled
        self._start = time.monotonic()
        self._last = 0.0

    def step(self, failed: bool = False) -> None:
        self.done += 1
        self.failed += int(failed)
        now = time.monotonic()
        if self.enabled and (now - self._last > 0.1 or self.done == self.total):
            self._last = now
            self._draw(now)

    def message(self, text: str) -> None:
        """Print a line above the bar."""
        if self.enabled:
            self.stream.write("\r\x1b[2K")
        self.stream.write(text + "\n")
        if self.enabled and self.done:
            self._draw(time.monotonic())
        self.stream.flush()

    def close(self) -> None:
        if self.enabled:
            self.stream.write("\r\x1b[2K")
            self.stream.flush()

    def _draw(self, now: float) -> None:
        width = 30
        fraction = self.done / self.total if self.total else 1.0
        filled = int(round(width * fraction))
        rate = self.done / max(now - self._start, 1e-9)
        remaining = (self.total - self.done) / rate if rate > 0 else 0.0
        bar = "#" * filled + "-" * (width - filled)
        failed = f", {self.failed} failed" if self.failed else ""
        self.stream.write(
            f"\r{self.label} [{bar}] {self.done}/{self.total}{failed}  {rate:.1f}/s  ~{remaining:.0f}s left"
        )
        self.stream.flush()
