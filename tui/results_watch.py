"""Whether the results file a screen opened is still the one on disk.

The cycle refits into the same name (``fit … -o results.parquet``) while a screen may be open on it: the screen
goes on showing, and deciding on, the results it read — each decision bound to those rows, so nothing recorded is
wrong — but the analyst should know the file has been replaced, as the ledger's other analysts are told.
"""
from __future__ import annotations

import os
import time
from pathlib import Path


def signature(path: Path) -> tuple:
    """What changes when a file (or a folder of parts) is replaced or rewritten: device, inode, size and
    modification time, of each part of a folder; () when it is gone."""
    try:
        if path.is_dir():
            return tuple(sorted((entry.name, *signature(Path(entry.path))) for entry in os.scandir(path)))
        info = path.stat()
    except OSError:
        return ()
    return (info.st_dev, info.st_ino, info.st_size, info.st_mtime_ns)


class ResultsWatch:
    """The results file as a screen opened it; ``replaced`` says, once it is not (and stays said)."""

    def __init__(self, path: Path) -> None:
        self.path, self.opened, self.said = path, signature(path), None

    def replaced(self) -> str | None:
        """'results.parquet was replaced on disk at 10:42 …' from the first look that finds it changed; None before."""
        if self.said is None and signature(self.path) != self.opened:
            gone = not self.path.exists()
            at = time.strftime("%H:%M", time.localtime())
            self.said = (f"{self.path.name} was {'removed' if gone else 'replaced'} on disk by {at} (a new fit?): this "
                         "screen shows, and decides on, the results it opened"
                         + ("" if gone else "; q, then open it again for the new ones"))
        return self.said
