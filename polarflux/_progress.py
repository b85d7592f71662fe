"""Progress of long batches: a tqdm bar, drawn only on a terminal so logs and pipes stay clean."""

from __future__ import annotations

import shutil
import sys
from typing import TextIO

from tqdm import tqdm

__all__ = ["Progress"]


class Progress:
    """Progress of ``total`` items on ``stream`` (stderr), with a count of failures.

    ``enabled=None`` draws the bar only when the stream is a terminal; messages are
    printed either way, above the bar.
    """

    def __init__(self, total: int, label: str = "", stream: TextIO | None = None, enabled: bool | None = None,
                 unit: str = "map"):
        self.stream = stream if stream is not None else sys.stderr
        if enabled is None:
            enabled = bool(getattr(self.stream, "isatty", lambda: False)())
        self.failed = 0
        self.done = 0
        # a terminal that reports no width (a pseudo-terminal without a size) would get no bar at all
        width = shutil.get_terminal_size((100, 24)).columns or 100
        self._bar = tqdm(total=max(int(total), 0), desc=label, unit=unit, file=self.stream, disable=not enabled,
                         leave=False, ncols=min(width, 120))

    @property
    def total(self) -> int:
        return int(self._bar.total or 0)

    @total.setter
    def total(self, value: int) -> None:
        self._bar.total = int(value)
        self._bar.refresh()

    def step(self, failed: bool = False, count: int = 1) -> None:
        self.done += count
        if failed:
            self.failed += 1
            self._bar.set_postfix_str(f"{self.failed} failed", refresh=False)
        self._bar.update(count)

    def message(self, text: str) -> None:
        """Print a line above the bar."""
        if self._bar.disable:
            print(text, file=self.stream, flush=True)
        else:
            self._bar.write(text, file=self.stream)

    def close(self) -> None:
        self._bar.close()
