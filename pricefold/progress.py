"""A one-line progress bar on stderr, drawn only for a terminal."""
from __future__ import annotations

import os
import shutil
import sys
import time


class ProgressLine:
    """Call with (done, total); redraws at most ten times a second."""

    def __init__(self, label: str, stream=None, enabled: bool | None = None) -> None:
        self.stream = stream or sys.stderr
        if enabled is None:  # a terminal that can clear a line ("dumb" ones show the escape as text)
            enabled = self.stream.isatty() and os.environ.get("TERM", "") != "dumb"
        self.enabled = enabled
        self.label, self.last, self.drawn = label, 0.0, False

    def __call__(self, done: int, total: int) -> None:
        now = time.monotonic()
        if not self.enabled or (now - self.last < 0.1 and done < total):
            return
        self.last, self.drawn = now, True
        share = done / total if total else 1.0
        bar = "█" * int(share * 30)
        line = f"{self.label} {bar:<30} {share:4.0%}  {done:,}/{total:,} series"
        self.stream.write(f"\r{fitted(line, shutil.get_terminal_size().columns - 1)}")
        self.stream.flush()

    def say(self, text: str) -> None:
        """``text`` on the line (what is being done between bars: reading, checking, writing)."""
        if self.enabled:
            self.last, self.drawn = 0.0, True
            self.stream.write(f"\r{fitted(text, shutil.get_terminal_size().columns - 1)}\033[K")
            self.stream.flush()

    def close(self) -> None:
        if self.drawn:
            self.stream.write("\r\033[K")
            self.stream.flush()


def fitted(text: str, width: int) -> str:
    """``text`` within ``width`` cells, its middle left out (…): a line longer than the terminal wraps, and the
    carriage return that redraws it reaches back to its last row only (a long file name left its first 80
    characters behind; a trial)."""
    from fitcore.widths import cells, cut_middle
    return cut_middle(text, width, cells)
