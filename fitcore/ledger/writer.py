"""Appending decisions: under an exclusive ``flock``, catch up on the tail, check the rules, set an
interrupted tail aside, write every record of the append in one go, fsync.

A multi-record append carries ``batch`` markers (one id, index 1..N, size N) on every record, so
a writer killed half-way leaves an incomplete batch that readers leave out and the next append
moves, whole, to a side file beside the real file (``files.side_stem``; as it does a torn line).  A
failed write is cut back off, so nothing recorded earlier is ever touched.  Ctrl+C, a ``kill`` or a closed
SSH session that comes once the write has begun is acted on when the records are whole and synced
(``fitcore.outputs.atomic.signals_after``, as a batch's renames): only a ``kill -9`` or a power cut leaves
such a tail.
"""
from __future__ import annotations

import fcntl
import os
import uuid
from collections.abc import Callable, Iterable
from datetime import datetime, timezone
from typing import TYPE_CHECKING

from ..outputs.atomic import signals_after
from . import files
from .records import Entry, Identity, LedgerError, new_record
from .rules import check_against, check_alone

if TYPE_CHECKING:
    from .reader import Ledger


def append(book: Ledger, entries: Iterable[Entry] | Callable[[list[dict]], Iterable[Entry]], who: Identity, *,
           now: Callable[[], datetime] | None = None, before: Callable[[], None] | None = None,
           recorded: Callable[[list[dict]], None] | None = None) -> list[dict]:
    """Append to ``book``'s file; returns the records written (and ``book`` has read them).

    ``entries`` may be a function of the ledger's records (``book.histories`` is current when it
    is called): it runs under the lock, so a decision that depends on what is recorded (accept
    everything not yet decided) is made atomically.  Raises ``LedgerError`` — and writes nothing —
    when the chain is broken or unverifiable or an entry breaks a rule.  ``before()`` is called under the
    lock once the records are made, before any is written: what it raises (a command's Ctrl+C, recorded
    meanwhile) writes nothing.  ``recorded(records)`` is called once they are written and synced, before a
    signal held back meanwhile is acted on (a command says what stands).
    """
    clock = now or (lambda: datetime.now(timezone.utc))
    path = book.path
    if not callable(entries):
        entries = list(entries)
        signed = check_alone(entries)
    fd = files.open_ledger(path, write=True)
    try:
        files.lock(fd, fcntl.LOCK_EX)
        book.read_locked(fd)
        if book.unended and not book.problems:  # a whole last record without its line end: ended, then counted
            files.write_all(fd, path, os.fstat(fd).st_size, [b"\n"])  # (moved aside as a torn line before, with
            book.read_locked(fd)  # its batch: a team's last sign-off gone from the chain, re-decided by another)
        if book.state != "intact":
            refuse = ("records it read are gone" if book.replaced else "the chain is broken" if book.problems
                      else "the records cannot be verified without the key")
            raise LedgerError(f"{path}: {book.problem}; nothing was recorded ({refuse})")
        if callable(entries):
            entries = list(entries(book.records))
            signed = check_alone(entries)
        check_against(entries, book.histories, who)
        if not entries:
            return []
        batch = uuid.uuid4().hex if len(entries) > 1 else None
        seq, prev = book.head
        lines, records = [], []
        for index, entry in enumerate(entries, start=1):
            marker = {"id": batch, "index": index, "size": len(entries)} if batch else None
            record, line = new_record(entry, who, seq + index, stamp(clock()), prev, marker, book.key,
                                      signed[index - 1])
            prev = record["digest"]
            lines.append(line)
            records.append(record)
        if before is not None:
            before()
        with signals_after():  # a signal from here on is acted on once the records are whole and synced
            book.tail_moved_to = None
            if os.fstat(fd).st_size > book.tail_start:
                book.tail_moved_to = files.set_aside(fd, path, book.tail_start, clock())
            files.write_all(fd, path, book.tail_start, lines)
            written = book.take_written(fd, records, lines)
            if recorded is not None:
                recorded(written)
        return written
    finally:
        os.close(fd)  # closing releases the lock


def stamp(moment: datetime) -> str:
    return moment.astimezone(timezone.utc).isoformat(timespec="milliseconds").replace("+00:00", "Z")
