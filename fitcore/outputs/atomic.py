"""One atomic writer: a temporary file beside the target, written, flushed and fsynced, then renamed.

A reader never sees a half-written file, and a failed or killed run leaves the earlier file as it was.
Temporary names carry the writer's host and process id (``.NAME.pricefold-HOST-PID-TOKEN.tmp``), so the
next run writing the same name removes what a dead writer left behind (never a live writer's file, nor one a
dead writer's batch journal still names: ``journal``).
A new file gets the mode the umask allows (as ``open`` would give it); a replaced file keeps its mode.
"""
from __future__ import annotations

import contextlib
import hashlib
import os
import re
import secrets
import shutil
import signal
import socket
import stat
import threading
from dataclasses import dataclass
from pathlib import Path
from typing import BinaryIO, Callable

from ..errors import DataError
from .seal import seal_file

_TAG = "pricefold"
HOST = re.sub(r"[^A-Za-z0-9_.]", "_", socket.gethostname())[:40] or "host"


def temp_path(path: Path) -> Path:
    """A fresh name beside ``path`` for this process's temporary copy (``remove_leftovers`` knows it)."""
    return path.parent / f".{path.name[:120]}.{_TAG}-{HOST}-{os.getpid()}-{secrets.token_hex(4)}.tmp"


def journal_path(path: Path) -> Path:
    """A fresh name beside ``path`` for this process's batch journal (``journal``; never a ``.tmp``)."""
    return path.parent / f".{path.name[:120]}.{_TAG}-{HOST}-{os.getpid()}-{secrets.token_hex(4)}.journal"


JOURNAL = re.compile(re.escape(f".{_TAG}-{HOST}-") + r"(\d+)-[0-9a-f]+\.journal$")  # this host's journals


def alive(pid: int) -> bool:
    """Is process ``pid`` on this host still running (this one is)?"""
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # another user's live process
        return True
    return True


def remove_leftovers(path: Path) -> list[Path]:
    """Remove temporary files and folders that dead writers on this host left for ``path``; return them.  A dead
    writer's file that its batch journal names is kept: the batch is finished from it (``journal.finish_batches``)."""
    pattern = re.compile(re.escape(f".{path.name[:120]}.{_TAG}-{HOST}-") + r"(\d+)-[0-9a-f]+\.tmp$")
    removed = []
    try:
        entries = list(os.scandir(path.parent))
    except OSError:
        return removed
    journaled = {found.group(1) for found in map(JOURNAL.search, (entry.name for entry in entries)) if found}
    for entry in entries:
        match = pattern.match(entry.name)
        if match is None or match.group(1) in journaled or alive(int(match.group(1))):
            continue
        leftover = Path(entry.path)
        try:
            if entry.is_dir(follow_symlinks=False):
                shutil.rmtree(leftover)
            else:
                leftover.unlink()
            removed.append(leftover)
        except OSError:
            pass  # someone else's, or already gone: not ours to insist on
    return removed


def _umask() -> int:
    try:
        with open("/proc/self/status", encoding="ascii") as handle:
            for line in handle:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError):
        pass
    mask = os.umask(0o022)  # no /proc: read it the old way (not thread-safe, hence the fallback only)
    os.umask(mask)
    return mask


def _mode_for(path: Path) -> int:
    try:
        return stat.S_IMODE(os.stat(path).st_mode)
    except OSError:
        return 0o666 & ~_umask()


def _cannot(path: Path, exc: OSError) -> DataError:
    return DataError(f"cannot write ({exc.strerror or exc})", path=str(path))


class _Hashing:
    """A binary file that also computes the SHA-256 of what passes through it."""

    def __init__(self, handle: BinaryIO) -> None:
        self.handle, self.digest = handle, hashlib.sha256()

    def write(self, data) -> int:
        self.digest.update(data)
        return self.handle.write(data)

    def __getattr__(self, name):  # pyarrow and TextIOWrapper ask for flush, closed, writable, …
        return getattr(self.handle, name)


@dataclass
class Staged:
    """A file written in full under a temporary name: ``commit`` puts it in place, ``discard`` drops it.  The
    folder is held open meanwhile (``folder``), so a folder moved under a run still has its temporary file removed."""

    path: Path
    temp: Path
    sha256: str | None  # None when written by name (``stage``)
    folder: int = -1  # the target folder's descriptor, closed once the file is put in place or dropped

    def commit(self) -> None:
        self.put()
        sync_folder(self.path.parent)

    def put(self) -> None:
        """Rename into place; the folder is not synced yet (``commit`` does both)."""
        try:
            os.replace(self.temp, self.path)
        except OSError as exc:
            moved = self.folder_moved()
            self.discard()
            if moved:
                raise moved from None
            raise _cannot(self.path, exc) from None
        self._close()

    def folder_moved(self) -> DataError | None:
        """The error to raise if the target's folder is no longer the one the file was written in (renamed or
        removed while the run went on): the file would land elsewhere, or nowhere."""
        try:
            same = self.folder < 0 or os.path.samestat(os.fstat(self.folder), os.stat(self.path.parent))
        except OSError:
            same = False
        return None if same else DataError(f"its folder {self.path.parent} was moved or removed while it was "
                                           "written; nothing was put there", path=str(self.path))

    def discard(self) -> None:
        try:
            if self.folder >= 0:  # wherever the folder is now
                os.unlink(self.temp.name, dir_fd=self.folder)
            else:
                os.unlink(self.temp)
        except OSError:
            pass
        self._close()

    def _close(self) -> None:
        if self.folder >= 0:
            os.close(self.folder)
            self.folder = -1


def stage(path: str | Path, write: Callable[[BinaryIO], object], *, by_name: bool = False) -> Staged:
    """Write ``path``'s content to a temporary file beside it (``write(handle)``), fsynced; nothing visible yet.

    ``by_name``: ``write`` gets the temporary file's name instead of a handle, for a library that writes a
    file itself (pyarrow: no Python call per write, no copy through Python buffers); this process keeps the
    file it created open, fsyncs it and checks it is still the file at that name.  No digest is taken then
    (``sha256`` is None): give it a handle where the digest is recorded — and the file is sealed with it
    (``seal.seal_file``: its SHA-256 beside its bytes, where the file system keeps extended attributes).

    A symlink is written through: the file it points to is replaced (beside it, so the rename stays on
    one file system) and the link stays a link, as an editor saving through a link does."""
    path = Path(path)
    if path.is_symlink():
        path = Path(os.path.realpath(path))
    remove_leftovers(path)
    temp = temp_path(path)
    try:
        fd = os.open(temp, os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_CLOEXEC", 0), 0o600)
    except OSError as exc:
        raise _cannot(path, exc) from None
    digest = None
    try:
        os.fchmod(fd, _mode_for(path))
        with os.fdopen(fd, "wb") as raw:
            if by_name:
                write(str(temp))
                if not os.path.samestat(os.fstat(raw.fileno()), os.stat(temp, follow_symlinks=False)):
                    raise OSError(f"the temporary file {temp.name} was replaced while written")
            else:
                handle = _Hashing(raw)
                write(handle)
                raw.flush()
                digest = handle.digest.hexdigest()
                seal_file(temp, digest)  # a later run replaces it only unchanged (``guard.is_own``)
            os.fsync(raw.fileno())
    except BaseException as exc:
        temp.unlink(missing_ok=True)
        if isinstance(exc, OSError):
            raise _cannot(path, exc) from None
        raise
    try:
        folder = os.open(path.parent, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0) | getattr(os, "O_CLOEXEC", 0))
    except OSError:
        folder = -1  # (a system without directory descriptors: removed by name, as before)
    return Staged(path, temp, digest, folder)


def atomic_write(path: str | Path, write: Callable[[BinaryIO], object], *, by_name: bool = False) -> str | None:
    """Write ``path`` atomically with ``write(handle)``; return the SHA-256 of what was written (None
    ``by_name``: see ``stage``)."""
    staged = stage(path, write, by_name=by_name)
    staged.commit()
    return staged.sha256


class InterruptedAfterWriting(KeyboardInterrupt):
    """Ctrl+C (or ``signum``) that came while a batch's files were renamed into place, raised once all of them
    were."""

    def __init__(self, written: list[str], signum: int = signal.SIGINT) -> None:
        super().__init__()
        self.written = written
        self.signum = signum


_DEFERRED = ("SIGINT", "SIGTERM", "SIGHUP")


@contextlib.contextmanager
def signals_after():
    """SIGINT, SIGTERM and SIGHUP that come inside the block, acted on at its end as they would have been
    (their handler called, or the default action: the process ends), so a batch's files are renamed all or
    none.  Only the main thread can set handlers; elsewhere the block runs as it is."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    came: list = []
    previous = {}
    for name in _DEFERRED:
        number = getattr(signal, name, None)
        if number is not None:
            previous[number] = signal.signal(number, lambda signum, frame: came.append((signum, frame)))
    try:
        yield
    finally:
        for number, handler in previous.items():
            signal.signal(number, handler if handler is not None else signal.SIG_DFL)
        pending = dict(came)  # each signal once, as the system keeps a pending one
        for number in sorted(pending, key=lambda n: callable(previous[n])):  # a default action before a raise
            handler = previous[number]
            if callable(handler):
                handler(number, pending[number])
            elif handler != signal.SIG_IGN:
                signal.raise_signal(number)


def staging_folder(path: Path) -> Path:
    """A fresh folder beside ``path`` to build a results folder in (removed by a later run if we die)."""
    remove_leftovers(path)
    folder = temp_path(path)
    try:
        folder.mkdir()
    except OSError as exc:
        raise _cannot(path, exc) from None
    return folder


def sync_folder(folder: Path) -> None:
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)
