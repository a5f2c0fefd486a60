"""A small progress bar on standard error for commands over many files."""

from __future__ import annotations

import sys
import time
from typing import TextIO


class Progress:
    """``Progress(total, label)``; call :meth:`step` after each item.

    Draws an in-place bar when the stream is a terminal and one line per item
    otherwise (logs stay readable). Silent when ``total`` is 1 or ``quiet``.
    """

    def __init__(self, total: int, label: str, *, stream: TextIO | None = None, quiet: bool = False) -> None:
        self.total = total
        self.label = label
        self.stream = stream or sys.stderr
        self.done = 0
        self.quiet = quiet or total <= 1
        self.t0 = time.monotonic()
        self.tty = bool(getattr(self.stream, "isatty", lambda: False)())

    def step(self, item: str = "") -> None:
        """Mark one more item finished (``item`` names it)."""
        self.done += 1
        if self.quiet:
            return
        elapsed = time.monotonic() - self.t0
        if self.tty:
            width = 28
            filled = int(width * self.done / self.total)
            bar = "#" * filled + "-" * (width - filled)
            eta = elapsed / self.done * (self.total - self.done)
            self.stream.write(f"\r{self.label} [{bar}] {self.done}/{self.total}  {eta:4.0f} s left ")
            if self.done == self.total:
                self.stream.write("\n")
        else:
            self.stream.write(f"{self.label} {self.done}/{self.total} {item}\n")
        self.stream.flush()
