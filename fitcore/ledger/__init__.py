"""The sign-off ledger: the chained, append-only record of decisions and its replay into each
series' status.

- ``records``: the schemas (/1, /2), ``Entry``, ``Identity``, canonical bytes and digests;
- ``chain``: one record's digest and link checked after those before it;
- ``reader``: ``Ledger``, a file read and verified as it is read (in full once, then the tail);
- ``rules`` and ``writer``: appends under the exclusive lock, refused when a rule is broken;
- ``files``: regular files only, locks, the side file of an interrupted tail;
- ``replay``: statuses from records (pure).

May import: ``results``, ``review``, ``fit``, ``data`` and the shared modules.
"""
from __future__ import annotations

import json
from collections.abc import Callable, Iterable
from datetime import datetime
from pathlib import Path

from .reader import BROKEN, INTACT, UNVERIFIABLE, Ledger
from .records import (
                      ACTIONS,
                      GENESIS,
                      SCHEMA,
                      SCHEMA_1,
                      Entry,
                      Identity,
                      LedgerConflict,
                      LedgerError,
                      Problem,
                      canonical,
                      check_entry,
                      digest_of,
                      results_digest,
)


def append(path: str | Path, entries: Iterable[Entry] | Callable[[list[dict]], Iterable[Entry]], who: Identity,
           *, key: bytes | None = None, now: Callable[[], datetime] | None = None) -> list[dict]:
    """Open the ledger (verifying it in full) and append once; see ``writer.append``."""
    return Ledger(path, key).append(entries, who, now=now)


def verify(path: str | Path, key: bytes | None = None) -> list[Problem]:
    """Every problem of the ledger, by line (empty when intact); keyed records read without the
    key are one problem.  An interrupted tail is not a problem (``Ledger.notes``)."""
    book = Ledger(path, key)
    if not book.exists:
        raise LedgerError(f"{path}: file not found")
    return book.problems or ([book.problem] if book.state == UNVERIFIABLE else [])


def parse(data: bytes) -> tuple[list[dict], list[Problem]]:
    """Records and JSON problems of a ledger's bytes, *without verifying the chain*: readers use
    ``Ledger``.  Kept for callers written before it."""
    records, problems = [], []
    lines = data.split(b"\n")
    torn = lines.pop() if lines else b""
    for number, line in enumerate(lines, start=1):
        try:
            record = json.loads(line)
            if not isinstance(record, dict):
                raise ValueError
        except (ValueError, RecursionError):  # (nested past the parser's depth)
            problems.append(Problem(number, "not a valid JSON record"))
            continue
        records.append(record)
    if torn:
        problems.append(Problem(len(lines) + 1, "torn last line (an interrupted write)"))
    return records, problems


__all__ = ["ACTIONS", "BROKEN", "GENESIS", "INTACT", "SCHEMA", "SCHEMA_1", "UNVERIFIABLE", "Entry", "Identity",
           "Ledger", "LedgerConflict", "LedgerError", "Problem", "append", "canonical", "check_entry", "digest_of",
           "parse", "results_digest", "verify"]
