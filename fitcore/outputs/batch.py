"""Several files put in place as one step (the rejects file and the results), and earlier files removed with them.

``Batch``: each ``add`` stages a file (``atomic.stage``); ``remove`` names an earlier file to remove if it still
has the SHA-256 it was judged by.  Leaving the ``with`` block without an error writes the redo journal
(``journal``), renames the files in the order added, removes the named files, syncs, and removes the journal —
with SIGINT, SIGTERM and SIGHUP acted on only after that (``atomic.signals_after``).  An error drops every staged
file, leaving earlier files as they were; a ``kill -9`` in the middle leaves the journal, from which the next
writer of those names finishes the step (``journal.finish_batches``).
"""
from __future__ import annotations

import os
import signal
from pathlib import Path
from typing import BinaryIO, Callable

from ..errors import DataError
from .atomic import InterruptedAfterWriting, Staged, signals_after, stage, sync_folder
from .journal import sha256_of, write_journal


class Batch:
    """Files written as one step (see the module)."""

    def __init__(self) -> None:
        self.staged: list[Staged] = []
        self.removals: list[tuple[Path, str]] = []

    def add(self, path: str | Path, write: Callable[[BinaryIO], object], *, by_name: bool = False) -> Staged:
        staged = stage(path, write, by_name=by_name)
        self.staged.append(staged)
        return staged

    def remove(self, path: str | Path, sha256: str) -> None:
        """Remove ``path`` with the batch, if it is then still a plain file with this SHA-256 (else it is left)."""
        self.removals.append((Path(path), sha256))

    def __enter__(self) -> "Batch":
        return self

    def __exit__(self, kind, value, tb) -> None:
        if kind is not None:
            for staged in self.staged:
                staged.discard()
            return
        done = False
        try:
            with signals_after():  # Ctrl+C, a kill or a closed SSH session lands after the journal is removed
                self._put_in_place()
                done = True
        except KeyboardInterrupt as exc:
            if done:  # said as such: "nothing was written" would be untrue
                raise InterruptedAfterWriting([str(staged.path) for staged in self.staged],
                                              getattr(exc, "signum", signal.SIGINT)) from None
            raise

    def _put_in_place(self) -> None:
        moved = next(filter(None, (staged.folder_moved() for staged in self.staged)), None)
        if moved is not None:
            for staged in self.staged:
                staged.discard()
            raise moved
        removals = [(path, digest) for path, digest in self.removals if sha256_of(path) == digest]
        journal = None
        if len(self.staged) + len(removals) > 1:  # one rename alone is atomic already
            try:
                journal = write_journal([(staged.temp, staged.path) for staged in self.staged], removals)
            except OSError as exc:
                for staged in self.staged:
                    staged.discard()
                where = self.staged[0].path if self.staged else removals[0][0]
                raise DataError(f"cannot write ({exc.strerror or exc})", path=str(where)) from None
        try:
            for i, staged in enumerate(self.staged):
                try:
                    staged.put()
                except BaseException:
                    for rest in self.staged[i + 1:]:
                        rest.discard()
                    raise
            for path, _ in removals:
                try:
                    os.unlink(path)
                except FileNotFoundError:
                    pass
                except OSError as exc:
                    raise DataError(f"cannot remove an earlier run's file ({exc.strerror})", path=str(path)) from None
            for folder in dict.fromkeys([staged.path.parent for staged in self.staged] +
                                        [path.parent for path, _ in removals]):
                sync_folder(folder)
        finally:
            if journal is not None:  # done, or failed while this process could still say so: nothing to finish
                os.unlink(journal)
