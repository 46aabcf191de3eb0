"""The sign-off ledger: append-only JSON Lines, each record chained to the one before.

Every record carries ``prev`` (the previous record's digest) and ``digest``:
SHA-256 over the record's canonical JSON without ``digest`` — or, when a key
is given (``PRICEFOLD_LEDGER_KEY`` at the command line), HMAC-SHA-256 with
that key, so someone who can edit the file but lacks the key cannot forge a
valid chain.  Any edit, deletion, insertion or reordering breaks the chain
and ``verify`` names the line.

Appends take an exclusive ``flock`` on the ledger, re-read its tail under the
lock to chain to the true last record, write whole lines, flush and fsync.
A torn last line (a writer killed mid-write, a full disk) is moved to a side
file ``<ledger>.torn-<UTC time>`` by the next append; the chain continues
from the last whole record.  A failed write is cut back off, so nothing
recorded earlier is ever touched.
"""
from __future__ import annotations

import fcntl
import hashlib
import hmac
import json
import os
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path
from typing import Callable, Iterable

from ..errors import PricefoldError

SCHEMA = "pricefold-ledger/1"
GENESIS = "0" * 64
ACTIONS = ("accept", "override", "note", "hold", "revoke")


class LedgerError(PricefoldError):
    """The ledger cannot be read or written as asked; the message says why, in one line."""


@dataclass(frozen=True)
class Entry:
    """One decision to record (what the caller decides; the ledger adds seq, time, chain)."""

    series: dict
    action: str
    fingerprint: str
    results: str
    model: str | None = None
    proposed: str | None = None
    note: str = ""


@dataclass(frozen=True)
class Identity:
    """Who records: a display name, the real OS user, the host."""

    analyst: str
    os_user: str
    host: str


@dataclass(frozen=True)
class Problem:
    line: int
    message: str

    def __str__(self) -> str:
        return f"line {self.line}: {self.message}"


def canonical(record: dict) -> bytes:
    return json.dumps(record, sort_keys=True, separators=(",", ":"), ensure_ascii=False).encode("utf-8")


def digest_of(record: dict, key: bytes | None) -> str:
    body = canonical({k: v for k, v in record.items() if k != "digest"})
    if key:
        return hmac.new(key, body, hashlib.sha256).hexdigest()
    return hashlib.sha256(body).hexdigest()


def results_digest(header: dict) -> str:
    """Digest of a results file's settings and input: which fit a decision was made on."""
    return hashlib.sha256(canonical({"settings": header.get("settings"), "input": header.get("input")})).hexdigest()


def check_entry(entry: Entry) -> None:
    if entry.action not in ACTIONS:
        raise LedgerError(f"expected an action among {', '.join(ACTIONS)}, got {entry.action!r}")
    if entry.action == "override" and not entry.note.strip():
        raise LedgerError("an override needs a note saying why the proposal was not taken")
    if entry.action == "override" and not entry.model:
        raise LedgerError("an override must name the candidate chosen instead")


def append(path: str | Path, entries: Iterable[Entry] | Callable[[list[dict]], Iterable[Entry]],
           who: Identity, *, key: bytes | None = None, now: Callable[[], datetime] | None = None) -> list[dict]:
    """Append decisions under an exclusive lock; returns the records written.

    ``entries`` may be a function of the ledger's current records: it is
    called under the lock, so a decision that depends on what is already
    recorded (accept everything not yet decided) is made atomically.
    """
    path = Path(path)
    clock = now or (lambda: datetime.now(timezone.utc))
    try:
        fd = os.open(path, os.O_RDWR | os.O_CREAT | os.O_APPEND, 0o644)
    except OSError as exc:
        raise LedgerError(f"{path}: cannot open the ledger for writing ({exc.strerror})") from None
    try:
        fcntl.flock(fd, fcntl.LOCK_EX)
        size = _set_aside_torn_tail(fd, path, clock)
        records = []
        if callable(entries):
            records, problems = parse(_read_all(fd))
            if problems:
                raise LedgerError(f"{path}: {problems[0]}; run 'pricefold ledger verify' before recording more")
            entries = entries(records)
            last = records[-1] if records else None
        else:
            last = _last_record(fd, path, size)
        entries = list(entries)
        for entry in entries:
            check_entry(entry)
        written, lines = [], []
        seq, prev = (last["seq"], last["digest"]) if last else (0, GENESIS)
        for entry in entries:
            seq += 1
            record = {"schema": SCHEMA, "seq": seq, "at": _stamp(clock()), "analyst": who.analyst,
                      "os_user": who.os_user, "host": who.host, "series": entry.series,
                      "fingerprint": entry.fingerprint, "results": entry.results, "action": entry.action,
                      "model": entry.model, "proposed": entry.proposed, "note": entry.note, "prev": prev,
                      "digest_kind": "hmac-sha256" if key else "sha256"}
            record["digest"] = prev = digest_of(record, key)
            written.append(record)
            lines.append(canonical(record) + b"\n")
        if lines:
            _write_all(fd, path, size, b"".join(lines))
        return written
    finally:
        os.close(fd)  # closing releases the lock


def _write_all(fd: int, path: Path, size: int, payload: bytes) -> None:
    try:
        view = memoryview(payload)
        while view:
            done = os.write(fd, view)
            view = view[done:]
        os.fsync(fd)
    except OSError as exc:
        try:  # cut back whatever part of this write landed; earlier records stay as they were
            os.ftruncate(fd, size)
            os.fsync(fd)
        except OSError:
            pass
        raise LedgerError(f"{path}: the decision was not recorded ({exc.strerror}); earlier records are intact") from None


def _stamp(moment: datetime) -> str:
    return moment.astimezone(timezone.utc).isoformat(timespec="milliseconds").replace("+00:00", "Z")


def _read_all(fd: int) -> bytes:
    os.lseek(fd, 0, os.SEEK_SET)
    chunks = []
    while chunk := os.read(fd, 1 << 20):
        chunks.append(chunk)
    return b"".join(chunks)


def _set_aside_torn_tail(fd: int, path: Path, clock) -> int:
    """Move bytes after the last newline to a side file; return the file's size after."""
    size = os.fstat(fd).st_size
    if size == 0:
        return 0
    end = size
    block = 4096
    while True:
        start = max(0, end - block)
        os.lseek(fd, start, os.SEEK_SET)
        data = os.read(fd, end - start)
        cut = data.rfind(b"\n")
        if cut >= 0 or start == 0:
            keep = start + cut + 1 if cut >= 0 else 0
            break
        block *= 2
    if keep == size:
        return size
    os.lseek(fd, keep, os.SEEK_SET)
    torn = os.read(fd, size - keep)
    side = path.with_name(f"{path.name}.torn-{clock().strftime('%Y%m%dT%H%M%S%fZ')}")
    with open(side, "xb") as handle:
        handle.write(torn)
        handle.flush()
        os.fsync(handle.fileno())
    os.ftruncate(fd, keep)
    os.fsync(fd)
    return keep


def _last_record(fd: int, path: Path, size: int) -> dict | None:
    if size == 0:
        return None
    block = 4096
    while True:
        start = max(0, size - block)
        os.lseek(fd, start, os.SEEK_SET)
        data = os.read(fd, size - start)
        cut = data.rfind(b"\n", 0, len(data) - 1)
        if cut >= 0 or start == 0:
            line = data[cut + 1:] if cut >= 0 else data
            break
        block *= 2
    try:
        record = json.loads(line)
        record["seq"], record["digest"]  # noqa: B018 - both must exist to chain
        return record
    except (ValueError, KeyError, TypeError):
        raise LedgerError(f"{path}: its last record is damaged; run 'pricefold ledger verify' before recording more") from None


def parse(data: bytes) -> tuple[list[dict], list[Problem]]:
    """Records and reading problems (bad JSON, torn tail) of a ledger's bytes."""
    records, problems = [], []
    lines = data.split(b"\n")
    torn = lines.pop() if lines else b""
    for number, line in enumerate(lines, start=1):
        try:
            record = json.loads(line)
            if not isinstance(record, dict):
                raise ValueError
        except ValueError:
            problems.append(Problem(number, "not a valid JSON record"))
            continue
        record["_line"] = number
        records.append(record)
    if torn:
        problems.append(Problem(len(lines) + 1, f"torn last line ({len(torn)} bytes, an interrupted write); "
                                                "the next append moves it to a side file"))
    return records, problems


def read(path: str | Path) -> tuple[list[dict], list[Problem]]:
    path = Path(path)
    if not path.exists():
        return [], []
    try:
        return parse(path.read_bytes())
    except OSError as exc:
        raise LedgerError(f"{path}: cannot read the ledger ({exc.strerror})") from None


def verify(path: str | Path, key: bytes | None = None) -> list[Problem]:
    """Every problem in the ledger, by line: edits, deletions, reordering, bad seq, bad JSON, torn tail."""
    path = Path(path)
    if not path.exists():
        raise LedgerError(f"{path}: file not found")
    records, problems = read(path)
    prev, seq = GENESIS, 0
    for record in records:
        line = record.pop("_line")
        if record.get("schema") != SCHEMA:
            problems.append(Problem(line, f"expected schema {SCHEMA!r}, found {record.get('schema')!r}"))
        kind = record.get("digest_kind")
        if key and kind != "hmac-sha256":
            problems.append(Problem(line, "plain digest while a ledger key is in force (added without the key)"))
        elif not key and kind == "hmac-sha256":
            problems.append(Problem(line, "keyed digest: set PRICEFOLD_LEDGER_KEY to verify it"))
        elif record.get("digest") != digest_of(record, key if kind == "hmac-sha256" else None):
            problems.append(Problem(line, "record was edited: its digest does not match its content"))
        if record.get("prev") != prev:
            problems.append(Problem(line, "chain broken: 'prev' is not the digest of the record before "
                                          "(a record was deleted, inserted or moved)"))
        if record.get("seq") != seq + 1:
            problems.append(Problem(line, f"seq {record.get('seq')} follows seq {seq}"))
        prev, seq = record.get("digest"), record.get("seq") if isinstance(record.get("seq"), int) else seq
    return sorted(problems, key=lambda p: p.line)
