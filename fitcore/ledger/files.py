"""The ledger's file: opened only when it is a regular file, locked, and its interrupted tail set aside.

The file type is checked before opening (opening a FIFO for reading waits for a writer) and
again on the open descriptor.  Files are created with mode 0666 less the umask, like any file
the user makes.
"""
from __future__ import annotations

import errno
import fcntl
import glob
import os
import stat
import zlib
from datetime import datetime
from pathlib import Path

from .records import LedgerError

KINDS = ((stat.S_ISDIR, "a folder"), (stat.S_ISFIFO, "a FIFO (named pipe)"), (stat.S_ISSOCK, "a socket"),
         (stat.S_ISCHR, "a character device"), (stat.S_ISBLK, "a block device"))
MODE = 0o666  # less the umask


def check_regular(path: Path, status: os.stat_result) -> None:
    if not stat.S_ISREG(status.st_mode):
        kind = next((words for test, words in KINDS if test(status.st_mode)), "not a regular file")
        raise LedgerError(f"{path}: expected a ledger file, found {kind}")


def status_of(path: Path) -> os.stat_result | None:
    """The file's status (symlinks followed), None when there is no file; a non-regular file is an error."""
    try:
        status = os.stat(path)
    except FileNotFoundError:
        return None
    except OSError as exc:
        raise LedgerError(f"{path}: cannot read the ledger ({exc.strerror})") from None
    check_regular(path, status)
    return status


def open_ledger(path: Path, *, write: bool) -> int:
    """A descriptor on the ledger (created when writing); non-blocking open, so a FIFO swapped in
    after the check cannot hang it, and checked again once open."""
    status_of(path)
    flags = (os.O_RDWR | os.O_CREAT | os.O_APPEND if write else os.O_RDONLY) | os.O_NONBLOCK | os.O_CLOEXEC
    try:
        fd = os.open(path, flags, MODE)
    except OSError as exc:
        doing = "open the ledger for writing" if write else "read the ledger"
        raise LedgerError(f"{path}: cannot {doing} ({exc.strerror})") from None
    try:
        check_regular(path, os.fstat(fd))
    except LedgerError:
        os.close(fd)
        raise
    return fd


def lock(fd: int, kind: int, wait: bool = True) -> bool:
    """Take a ``flock`` of ``kind``; False when ``wait`` is off and another process holds a clashing lock."""
    try:
        fcntl.flock(fd, kind | (0 if wait else fcntl.LOCK_NB))
        return True
    except BlockingIOError:
        return False


def read_from(fd: int, path: Path, start: int) -> bytes:
    chunks, offset = [], start
    try:
        while chunk := os.pread(fd, 1 << 24, offset):
            chunks.append(chunk)
            offset += len(chunk)
    except OSError as exc:
        raise LedgerError(f"{path}: cannot read the ledger ({exc.strerror})") from None
    return b"".join(chunks)


def crc_of(fd: int, path: Path, end: int) -> int | None:
    """The CRC-32 of the file's bytes before ``end``, read 1 MiB at a time into one buffer; None when the
    file now ends before ``end``."""
    buffer = memoryview(bytearray(1 << 20))
    offset = crc = 0
    try:
        while offset < end:
            got = os.preadv(fd, [buffer[:min(len(buffer), end - offset)]], offset)
            if not got:
                return None
            crc = zlib.crc32(buffer[:got], crc)
            offset += got
    except OSError as exc:
        raise LedgerError(f"{path}: cannot read the ledger ({exc.strerror})") from None
    return crc


def tail_moved_words(side: Path) -> str:
    """What is said of an interrupted tail an append moved to the side file ``side`` (``set_aside``): the command
    line's note and the triage screen's header, in the same words."""
    return f"the interrupted tail after its last whole record was moved to {side.name} beside it"


def set_aside(fd: int, path: Path, keep: int, moment: datetime) -> Path:
    """Move the bytes after ``keep`` (a torn line, an incomplete batch) to ``<ledger>.torn-<UTC time>``
    beside the real file (a ledger name too long for that: ``side_stem``), then cut them from the ledger.
    The side file is written under a temporary name and renamed once whole, so it always holds a whole
    tail; if it cannot be written (disk full, folder not writable) nothing changes and nothing is left
    behind.  Called under the exclusive lock, so a temporary side file found then is a killed writer's:
    it is removed."""
    real = Path(os.path.realpath(path))
    stem = side_stem(real)
    name = f"{stem}.torn-{moment.strftime('%Y%m%dT%H%M%S%fZ')}"
    side, temp = real.with_name(name), real.with_name(f".{name}.{os.getpid()}.tmp")
    for stale in real.parent.glob(f".{glob.escape(stem)}.torn-*.tmp"):
        _remove(stale)
    tail = read_from(fd, path, keep)
    made = None
    try:
        side_fd = os.open(temp, os.O_WRONLY | os.O_CREAT | os.O_EXCL | os.O_CLOEXEC, MODE)
        made = temp
        try:
            view = memoryview(tail)
            while view:
                view = view[os.write(side_fd, view):]
            os.fsync(side_fd)
        finally:
            os.close(side_fd)
        os.rename(temp, side)
        made = side
        os.ftruncate(fd, keep)
        os.fsync(fd)
    except OSError as exc:
        if made is not None:
            _remove(made)
        reason = "the disk is full" if exc.errno in (errno.ENOSPC, errno.EDQUOT) else exc.strerror
        raise LedgerError(f"{path}: cannot set aside the interrupted tail ({len(tail)} bytes) beside it "
                          f"({reason}); nothing was recorded") from None
    return side


# What a side file's name adds to the ledger's: ".torn-" and a UTC time to the microsecond, and for its temporary
# copy a leading dot and ".PID.tmp" (a process id of up to 7 digits, Linux's largest).
SIDE_EXTRA = len(".torn-20261205T084800123456Z") + len("..1234567.tmp")


def side_stem(real: Path) -> str:
    """The ledger's name as its side files begin: whole where it fits the folder's longest name (255 bytes on most
    file systems) with what a side file adds; else cut on a character boundary and ``~`` plus the first 8 hex
    digits of the whole name's SHA-256 added, so every side file of that ledger still starts with its first
    characters (``ls`` finds it) and two long names alike at the start keep theirs apart."""
    import hashlib
    try:
        longest = os.pathconf(real.parent, "PC_NAME_MAX")
    except (OSError, ValueError):
        longest = 255
    raw = real.name.encode("utf-8", "surrogateescape")
    room = longest - SIDE_EXTRA
    if len(raw) <= room:
        return real.name
    mark = "~" + hashlib.sha256(raw).hexdigest()[:8]
    cut = raw[:room - len(mark)].decode("utf-8", "ignore")  # a character cut in two is left out
    return cut + mark


def _remove(path: Path) -> None:
    try:
        os.unlink(path)
    except OSError:
        pass


def write_all(fd: int, path: Path, size: int, lines: list[bytes]) -> None:
    """Write ``lines`` at the end and fsync; on failure cut back whatever part landed.  Written a few MiB
    at a time (100,000 signed records joined at once were another 0.12 GB)."""
    try:
        for piece in pieces(lines):
            view = memoryview(piece)
            while view:
                view = view[os.write(fd, view):]
        os.fsync(fd)
    except OSError as exc:
        try:  # earlier records stay as they were
            os.ftruncate(fd, size)
            os.fsync(fd)
        except OSError:
            pass
        raise LedgerError(f"{path}: the decision was not recorded ({exc.strerror}); earlier records are intact") from None


def pieces(lines: list[bytes], size: int = 1 << 22):
    """``lines`` joined into pieces of about ``size`` bytes, in order."""
    start = total = 0
    for end, line in enumerate(lines, start=1):
        total += len(line)
        if total >= size:
            yield b"".join(lines[start:end])
            start, total = end, 0
    if start < len(lines):
        yield b"".join(lines[start:])


def holds(fd: int, offset: int, lines: list[bytes]) -> bool:
    """Whether the file holds exactly ``lines`` from ``offset`` to its end (compared piece by piece)."""
    for piece in pieces(lines):
        if os.pread(fd, len(piece), offset) != piece:
            return False
        offset += len(piece)
    return os.fstat(fd).st_size == offset
