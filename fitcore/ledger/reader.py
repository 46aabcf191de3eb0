"""``Ledger``: a ledger file read and verified as it is read — in full once, then only the new tail.

Readers take whole records freely (a record is final once its line and, for a multi-record
append, its whole batch are written) and judge the rest of the file — a torn last line or an
incomplete last batch, an interrupted append — under a shared lock, so a live append is never
mistaken for a crash.  States:

- ``intact``: every record verified;
- ``broken``: a record is missing, edited, inserted, moved, or not a record (``problem`` names the
  line); a broken ledger is read once, stays as read, and takes no appends;
- ``unverifiable``: keyed records read without the key; readable, but takes no appends.

An interrupted tail is not a broken chain: it is left out (``notes`` says so) and the next append
moves it to a side file.  Appends (``append``) run through the same reader under the exclusive lock.

A reader that stays open also finds the records it verified changed in place (the same length: no
size or position moves): their bytes are read again and checked against the CRC-32 kept as they were
read, on a refresh that finds the file changed and before every append; a difference sends it back
to the start, where the chain names the line.  Before an append the bytes are not read again when the
file's status (its change time included: putting the modification time back changes it) is the one it
had when they were last found unchanged and that change time was then already ``settle_ns`` old: a
later write cannot share its clock tick.  The screen's poll does that reading once the file has been
still that long, so that a decision does not wait for it (26–69 ms at 100,000 records).
"""
from __future__ import annotations

import fcntl
import os
import threading
import time
import zlib
from collections.abc import Callable, Iterable
from datetime import datetime
from pathlib import Path

from ..collector import collector_paused
from . import files
from .chain import ChainState, check, check_plain
from .fastjson import parse_lines
from .records import GENESIS, Entry, Identity, Problem
from .replay import SeriesHistory, apply

INTACT, BROKEN, UNVERIFIABLE = "intact", "broken", "unverifiable"
# A read this large makes records by the thousand that live as long as the reader: they are moved out of the
# collector's sight (else the first full collection after it walks them all: 0.2–0.5 s at 100,000 records).
FREEZE_BYTES = 8 << 20


class Ledger:
    """The verified records of one ledger file and their replay into each series' history.

    ``records`` holds every well-formed record in file order (for a broken ledger, those after the
    break too, so they can be shown); ``histories`` replays them.  ``refresh()`` reads what was
    appended since; ``generation`` changes when the file had to be read again from the start.
    """

    def __init__(self, path: str | Path, key: bytes | None = None, *, wait: bool = True) -> None:
        self.path, self.key = Path(path), key or None
        self.generation = 0
        self._reset()
        self.refresh(wait=wait)

    def _reset(self) -> None:
        self.records: list[dict] = []
        self.histories: dict[str, SeriesHistory] = {}
        self.problems: list[Problem] = []
        self.notes: list[Problem] = []
        self.unended = False  # the last line is a whole record without its line end (``_unended``)
        # records this reader verified earlier are gone (an older copy restored, its end cut, the file removed):
        # refused as ``broken`` is, though the file read afresh may verify (``_vanished``)
        self.replaced = False
        self.exists = False
        self.tail_moved_to: Path | None = None  # the side file this reader's last append moved a torn tail to
        self._chain = ChainState()
        self._unverifiable: Problem | None = None
        self._offset = self._line = 0
        self._last_raw = b""
        # The CRC-32 of the bytes before ``_offset`` (the whole records verified), kept as they are read, to
        # find them changed in place: an edit of the same length moves nothing the cheaper checks see.  Any
        # edit breaks the chain, which the reread then names; the CRC has only to notice (and is read again
        # at twice SHA-256's speed: 26 vs 52 ms for 100,000 records, 67 MiB).
        self._prefix = 0
        self._prefix_seen: tuple | None = None  # the file's status when they were last found unchanged
        self._prefix_settled = False  # and its change time was then older than a clock tick (``settle_ns``)
        self._identity: tuple[int, int] | None = None
        self._seen: tuple | None = None

    # -- what is known ------------------------------------------------------------------------
    @property
    def state(self) -> str:
        return BROKEN if self.problems else UNVERIFIABLE if self._unverifiable else INTACT

    @property
    def problem(self) -> Problem | None:
        """The first problem (broken), or why the records cannot be verified (unverifiable)."""
        return self.problems[0] if self.problems else self._unverifiable

    @property
    def head(self) -> tuple[int, str]:
        """``(seq, digest)`` of the last whole record; ``(0, GENESIS)`` for an empty ledger."""
        return (self._chain.seq, self._chain.prev) if self.records else (0, GENESIS)

    @property
    def head_text(self) -> str:
        seq, digest = self.head
        return f"{seq}:{digest}"

    def holds(self, seq: int, digest: str) -> bool:
        """Whether the record at ``seq`` is still the one with ``digest`` (the head witness)."""
        if seq == 0:
            return digest == GENESIS
        return 0 < seq <= len(self.records) and self.records[seq - 1].get("seq") == seq \
            and self.records[seq - 1].get("digest") == digest

    # -- reading ------------------------------------------------------------------------------
    def refresh(self, wait: bool = True) -> list[dict]:
        """Read and verify what was appended since the last look; returns the new records.

        With ``wait`` off (a screen's poll) it never blocks: when a writer holds the lock it takes
        only the whole records already there and leaves the tail for the next look.
        """
        if self.problems:
            return []
        status = files.status_of(self.path)
        if status is None:
            if self.records:
                self._vanished("the ledger file is gone (removed, or moved away)")
            self.exists, self.notes, self.unended = False, [], False
            return []
        seen = _status_key(status)
        settle = seen == self._seen and self._unsettled(status)
        if seen == self._seen and not settle:
            return []
        fd = files.open_ledger(self.path, write=False)
        try:
            new = self._read(fd, judge=False, always=settle)
            if files.lock(fd, fcntl.LOCK_SH, wait):
                new += self._read(fd, judge=True, always=settle)
        finally:
            os.close(fd)  # closing releases the lock
        return new

    def _read(self, fd: int, judge: bool, always: bool = False) -> list[dict]:
        """Take the whole records after the last one read; ``judge``: the caller holds a lock, so
        whatever follows them is an interrupted append (noted), not one still being written.  The records
        already read are first found unchanged (``_same_prefix``; ``always``: even if the file's size and
        time are those of the last look, as before an append)."""
        now, status = time.time_ns(), os.fstat(fd)
        self.exists = True
        identity = (status.st_dev, status.st_ino)
        if self._identity not in (None, identity) or status.st_size < self._offset or not self._same_last(fd) \
                or not self._same_prefix(fd, status, always):
            return self._start_over(fd) if judge else []  # rewritten: judged only under the lock
        self._identity, whole = identity, not self._offset
        new = self._consume(files.read_from(fd, self.path, self._offset), judge)
        if whole:  # every record's bytes were just read and verified: as good as finding them unchanged
            self._prefix_seen = _status_key(status)
            self._prefix_settled = status.st_ctime_ns < now - settle_ns(status)
        if judge:
            self._seen = _status_key(status)
        return new

    def _same_last(self, fd: int) -> bool:
        """The last record read is still where it was (else the file was rewritten: read it all again)."""
        if not self._offset:
            return True
        size = len(self._last_raw) + 1
        return os.pread(fd, size, self._offset - size) == self._last_raw + b"\n"

    def _same_prefix(self, fd: int, status: os.stat_result, always: bool) -> bool:
        """The bytes of the records read are still those verified: read again and their CRC taken whenever the
        file's status changed since they were last found so (another analyst's append or an edit), and
        before an append unless that status had settled (see the module's notes).  Appends only add after
        them; a torn tail is not part of them."""
        seen = _status_key(status)
        if not self._offset or (seen == self._prefix_seen and (not always or self._prefix_settled)):
            return True
        now = time.time_ns()  # before the read: a write after it has a later change time, once settled
        same = files.crc_of(fd, self.path, self._offset) == self._prefix
        if same:
            self._prefix_seen, self._prefix_settled = seen, status.st_ctime_ns < now - settle_ns(status)
        return same

    def _unsettled(self, status: os.stat_result) -> bool:
        """Whether the verified bytes are due to be read again by a poll: the file has been still for
        ``settle_ns`` since they were last found unchanged (or written by this reader) at a change time
        too recent to rule out a write in the same clock tick."""
        return bool(self._offset) and not self._prefix_settled and not self.problems \
            and time.time_ns() > status.st_ctime_ns + settle_ns(status)

    def _start_over(self, fd: int) -> list[dict]:
        seq, digest = self.head
        self._reset()
        self.generation += 1
        new = self._read(fd, judge=True)
        if seq and not self.problems and not self.holds(seq, digest):
            self._vanished(f"records read earlier are gone: seq {seq} ({digest[:12]}…) is no longer in it (records "
                           "were removed from its end, or an older copy put in its place)")
        return new

    def _vanished(self, message: str) -> None:
        self.replaced = True
        self.problems.append(Problem(self._line + 1, message))

    def _consume(self, data: bytes, judge: bool) -> list[dict]:
        """Verify the whole lines of ``data`` (the file from ``_offset`` on) and take whole units: a
        record outside any batch, or a batch once its last record is read."""
        with collector_paused(freeze=len(data) >= FREEZE_BYTES):
            return self._verify_lines(data, judge)

    def _verify_lines(self, data: bytes, judge: bool) -> list[dict]:
        """Without ``judge`` (no lock held) a problem is not believed: a writer setting an interrupted
        tail aside may change the bytes being read.  The unit is left for a read under the lock."""
        start, end = self._offset, data.rfind(b"\n") + 1
        trimmed = len(data[:end].rstrip(b" \t\r\n"))  # blank lines at the end (an editor's) are a tail, not records
        end = data.find(b"\n", trimmed) + 1 if trimmed else 0
        new: list[dict] = []
        unit: list[dict] = []
        before = (self._chain.copy(), self._line, self._unverifiable)
        position, doubt = start, False
        chain, key = self._chain, self.key
        for raw, record in parsed_lines(data, end):
            self._line += 1
            position += len(raw) + 1
            if record is not None and check_plain(chain, record, raw, key):  # the usual record, in one pass
                unit.append(record)
                if chain.batch is None or self.problems:
                    new += self._take(unit, position, raw)
                    unit, before = [], (chain.copy(), self._line, self._unverifiable)
                continue
            if record is None:
                said = "a blank line between records" if not raw.strip() else "not a valid JSON record"
                problems, unverifiable, well_formed = [said], False, False
            else:
                problems, unverifiable, well_formed = check(self._chain, record, raw, self.key)
            if problems and not judge:
                doubt = True
                break
            self.problems += [Problem(self._line, message) for message in problems]
            if unverifiable and self._unverifiable is None:
                self._unverifiable = Problem(self._line, "keyed digest: set PRICEFOLD_LEDGER_KEY to verify it")
            if well_formed:
                unit.append(record)
            if self._chain.batch is None or self.problems:
                new += self._take(unit, position, raw)
                unit, before = [], (self._chain.copy(), self._line, self._unverifiable)
        lines_read = self._line
        self._prefix = zlib.crc32(memoryview(data)[:self._offset - start], self._prefix)
        if unit or doubt:  # an incomplete batch (counted once whole), or a doubt left for the locked read
            self._chain, self._line, self._unverifiable = before
        if judge:
            torn = data[end:]
            if torn and not torn.strip():  # only blank lines after the last record
                blank = torn.count(b"\n") or 1
                self.notes = self._tail_notes(unit, b"", lines_read) + [Problem(
                    lines_read + 1, f"{blank} blank line{'s' if blank > 1 else ''} at the end (an editor's save?) "
                                    f"ignored; the next append moves {'them' if blank > 1 else 'it'} to a side file")]
                return new
            if torn and not _could_be_record(torn):
                self.problems.append(Problem(lines_read + 1, f"the last line ({len(torn)} bytes, no line end) is not "
                                                             "the start of a ledger record: not a pricefold ledger, "
                                                             "or edited"))
                torn = b""
            self.unended = bool(torn) and _unended(torn, unit[-1]["digest"] if unit else self._chain.prev)
            if self.unended:
                self.notes = [Problem(lines_read + 1, "the last record has no line end (saved by a tool that drops the "
                                                      "final newline?): it and its batch are not counted until the "
                                                      "next append ends its line")]
                return new
            self.notes = self._tail_notes(unit, torn, lines_read)
        return new

    def _take(self, unit: list[dict], position: int, raw: bytes) -> list[dict]:
        self.records += unit
        apply(self.histories, unit)
        self._offset, self._last_raw = position, raw
        return unit

    def _tail_notes(self, unit: list[dict], torn: bytes, lines_read: int) -> list[Problem]:
        notes = []
        if unit:
            size = unit[0]["batch"]["size"]
            notes.append(Problem(self._line + 1, f"incomplete batch ({len(unit)} of {size} records, lines "
                                                 f"{self._line + 1}–{self._line + len(unit)}: an interrupted "
                                                 "append), not counted; the next append moves it to a side file"))
        if torn:
            notes.append(Problem(lines_read + 1, f"torn last line ({len(torn)} bytes, an interrupted write) ignored: "
                                                 "what it was recording does not count; the next append moves it to "
                                                 "a side file"))
        return notes

    # -- appending ----------------------------------------------------------------------------
    def append(self, entries: Iterable[Entry] | Callable[[list[dict]], Iterable[Entry]], who: Identity, *,
               now: Callable[[], datetime] | None = None, before: Callable[[], None] | None = None,
               recorded: Callable[[list[dict]], None] | None = None) -> list[dict]:
        """Record ``entries`` (or what a function of the records read under the lock returns) as one
        append: checked against the rules, whole or not at all.  See ``writer.append``."""
        from .writer import append
        return append(self, entries, who, now=now, before=before, recorded=recorded)

    def read_locked(self, fd: int) -> None:
        """Catch up under the writer's exclusive lock (on the writer's own descriptor)."""
        if not self.problems:
            self._read(fd, judge=True, always=True)

    @property
    def tail_start(self) -> int:
        """Where the whole records end: what follows is an interrupted append."""
        return self._offset

    def take_written(self, fd: int, records: list[dict] | None = None, lines: list[bytes] | None = None) -> list[dict]:
        """Take what this process just appended (still under its lock).  Given the ``records`` and their
        ``lines`` as written, and the file holds exactly those bytes after the known tail, they are taken as
        they are (made here, from canonical JSON: parsing and re-checking 100,000 of them cost seconds);
        otherwise the file is read back and verified like any tail."""
        if records and lines and not self.problems and not self._chain.batch:
            if files.holds(fd, self._offset, lines):
                status, written = os.fstat(fd), sum(map(len, lines))
                last = records[-1]
                self._chain.seq, self._chain.prev = last["seq"], last["digest"]
                self._chain.second = True
                self._chain.keyed = self._chain.keyed or last["digest_kind"] == "hmac-sha256"
                self._line += len(records)
                with collector_paused():
                    self._take(records, self._offset + written, lines[-1][:-1])
                for line in lines:
                    self._prefix = zlib.crc32(line, self._prefix)
                self._prefix_seen, self._prefix_settled = _status_key(status), False  # as written, just now
                self.notes, self.unended = [], False
                self._seen = _status_key(status)
                return records
        return self._read(fd, judge=True)


def _status_key(status: os.stat_result) -> tuple:
    return status.st_dev, status.st_ino, status.st_size, status.st_mtime_ns, status.st_ctime_ns


def settle_ns(status: os.stat_result) -> int:
    """How old a change time must be for any later write to get a later one: a second (the coarse clocks
    of some network file systems), two where the file system keeps whole seconds only."""
    return 2_000_000_000 if status.st_ctime_ns % 1_000_000_000 == 0 else 1_000_000_000


def opening(path: str | Path, key: bytes | None = None) -> Callable[[], Ledger]:
    """Start reading and verifying the ledger at ``path`` in a thread, while the caller reads something that
    leaves the interpreter free (a results file through Arrow); the function returned waits for it and gives
    the ``Ledger`` — or raises what opening it raised."""
    done: dict = {}

    def read() -> None:
        try:
            done["book"] = Ledger(path, key)
        except BaseException as exc:  # handed to the caller, who waits for it
            done["error"] = exc
    thread = threading.Thread(target=read, name="ledger", daemon=True)
    thread.start()

    def result() -> Ledger:
        thread.join()
        if "error" in done:
            raise done["error"]
        return done["book"]
    return result


# Every record's line is canonical JSON with sorted keys, so it starts with its "action" member: a
# write cut short leaves a prefix of that.  Anything else after the last line end (a results file
# given as the ledger, a hand edit) is not an interrupted write, and is never set aside as one.
_RECORD_START = b'{"action":"'


def _unended(torn: bytes, prev: str) -> bool:
    """Whether the bytes after the last line end are a whole record linked to the one before (``prev``): a line
    end lost, not a write cut short (an append ends its line before anything else; the locked read then verifies
    it as any record)."""
    import json
    try:
        record = json.loads(torn)
    except (ValueError, RecursionError):
        return False
    return isinstance(record, dict) and record.get("prev") == prev and isinstance(record.get("digest"), str)


def _could_be_record(torn: bytes) -> bool:
    return torn[:len(_RECORD_START)] == _RECORD_START[:len(torn)]


def parsed_lines(data: bytes, end: int, chunk: int = 1 << 22):
    """``(line, record)`` for the whole lines of ``data[:end]``, parsed ~4 MiB at a time (so a large
    ledger is never held as bytes, lines and records at once)."""
    position = 0
    while position < end:
        cut = data.rfind(b"\n", position, min(position + chunk, end)) + 1 or data.find(b"\n", position) + 1
        piece = data[position:cut]
        lines = piece.split(b"\n")[:-1]
        yield from zip(lines, parse_lines(lines, piece))
        position = cut
