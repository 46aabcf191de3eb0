"""A batch's redo journal: the files a batch puts in place land together even when its process is killed with
``kill -9`` (or the power goes) between two renames.

Before its first rename a batch writes, beside its first target, a small fsynced journal
(``.NAME.pricefold-HOST-PID-TOKEN.journal``): each temporary file, the name it goes to, its inode (a rename keeps
it: that is how a rename already done is known) and its size and modification time (a copy of the folder keeps
those), then each file to remove with the SHA-256 it must still have.
Then the renames, the removals, and the journal removed.  A journal whose process is gone (this host, by its pid,
as ``atomic.remove_leftovers`` judges) is a batch cut short after it was decided: the next writer of one of its
names finishes it (``finish_batches``: the temporary files are whole and synced, so the renames are redone), or,
where a temporary file is gone, undoes what it can (a file already put in place is removed: beside the earlier
files it would mislead) and says so.  A reader only says so (``unfinished``).

Names in a journal are relative to its folder, so a folder moved with its files keeps its journal true.
"""
from __future__ import annotations

import hashlib
import json
import os
import stat
from pathlib import Path

from ..errors import DataError
from .atomic import JOURNAL, alive, journal_path, sync_folder

FORMAT = "pricefold-batch/1"


def write_journal(renames: list[tuple[Path, Path]], removals: list[tuple[Path, str]]) -> Path:
    """Record ``renames`` (temporary file → target) and ``removals`` (path, SHA-256) beside the first target,
    synced with its folder entry; return the journal's path."""
    first = renames[0][1] if renames else removals[0][0]
    journal = journal_path(first)
    folder = journal.parent
    body = {"format": FORMAT,
            "renames": [{"temp": _relative(temp, folder), "target": _relative(target, folder), **_identity(temp)}
                        for temp, target in renames],
            "removals": [{"path": _relative(path, folder), "sha256": digest} for path, digest in removals]}
    fd = os.open(journal, os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_CLOEXEC", 0), 0o600)
    try:
        os.write(fd, json.dumps(body).encode("utf-8"))  # a few hundred bytes: one write
        os.fsync(fd)
    except BaseException:
        os.close(fd)
        os.unlink(journal)
        raise
    os.close(fd)
    sync_folder(folder)  # the journal's name is on disk before any rename is
    return journal


def sha256_of(path: Path) -> str | None:
    """The SHA-256 of the plain file at ``path`` (not following a link); None if there is none or it is not one."""
    try:
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NOFOLLOW", 0))
    except OSError:
        return None
    digest = hashlib.sha256()
    with os.fdopen(fd, "rb") as handle:
        if not stat.S_ISREG(os.fstat(fd).st_mode):
            return None
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def finish_batches(path: str | Path) -> list[str]:
    """Finish every batch a dead writer on this host left half done that names ``path`` (as a target, or a file to
    remove); return one line for each, saying what was done."""
    said = []
    for journal, body in _dead_journals(Path(path), drop_torn=True):
        try:
            said.append(_finish(journal, body))
        except OSError as exc:
            raise DataError(f"cannot finish what a killed fit left half in place ({exc.strerror or exc}; "
                            f"its journal: {journal.name})", path=str(path)) from None
    return said


def unfinished(path: str | Path) -> list[str]:
    """One line for each batch naming ``path`` that a dead writer left half done (nothing is changed)."""
    return [f"{path}: a fit was killed while putting its files in place ({_listed(journal, body)}); they may not "
            f"belong together until the next `pricefold fit` writing {Path(path).name} finishes that"
            for journal, body in _dead_journals(Path(path), drop_torn=False)]


def _dead_journals(path: Path, drop_torn: bool):
    """(journal, its content) for each journal in ``path``'s folder of a process no longer running that names
    ``path``; a journal cut short (its writer stopped while writing it, so before any rename) is skipped, and with
    ``drop_torn`` removed."""
    real = Path(os.path.realpath(path))
    try:
        entries = [entry.name for entry in os.scandir(real.parent)]
    except OSError:
        return
    for name in entries:
        found = JOURNAL.search(name)
        if found is None or alive(int(found.group(1))):
            continue
        journal = real.parent / name
        try:
            body = json.loads(journal.read_bytes())
            if body.get("format") != FORMAT:
                continue  # a later pricefold's: not ours to judge
        except (OSError, ValueError, AttributeError):
            if drop_torn:  # written only in part: the batch had not begun
                _drop(journal)
            continue
        named = [entry["target"] for entry in body["renames"]] + [entry["path"] for entry in body["removals"]]
        if any(os.path.realpath(real.parent / name) == str(real) for name in named):
            yield journal, body


def _finish(journal: Path, body: dict) -> str:
    folder = journal.parent
    renames = [(folder / entry["temp"], folder / entry["target"], entry) for entry in body["renames"]]
    gone = [target for temp, target, entry in renames if not os.path.lexists(temp) and not _is_new(target, entry)]
    pid = JOURNAL.search(journal.name).group(1)
    if gone:  # its new copy removed by someone: the step cannot be whole, so it is undone as far as it can be
        done = [target for temp, target, entry in renames if _is_new(target, entry)]
        for temp, target, _ in renames:
            _drop(temp)
        for target in done:  # beside the earlier files it would mislead; the one it replaced cannot come back
            _drop(target)
        _drop(journal)
        return (f"warning: {gone[0]}: a fit killed while putting its files in place (pid {pid}) cannot be finished: "
                f"the new copy of {', '.join(target.name for target in gone)} is gone; "
                + (f"removed the new {', '.join(target.name for target in done)} it had put in place (the earlier "
                   "one it replaced is lost)" if done else "the files there are left as they are"))
    for temp, target, entry in renames:
        try:
            os.replace(temp, target)
        except FileNotFoundError:
            if not _is_new(target, entry):  # else done already (by the killed run, or another run finishing it)
                raise
    removed = []
    for entry in body["removals"]:
        path = folder / entry["path"]
        if sha256_of(path) == entry["sha256"]:  # unchanged since the batch judged it
            _drop(path)
            removed.append(path.name)
    sync_folder(folder)
    _drop(journal)
    return (f"note: put in place what a fit killed while doing so (pid {pid}) had written in full: "
            f"{', '.join(target.name for _, target, _ in renames)}"
            + (f"; removed {', '.join(removed)}" if removed else ""))


def _listed(journal: Path, body: dict) -> str:
    return ", ".join([entry["target"] for entry in body["renames"]] + [entry["path"] for entry in body["removals"]])


def _identity(temp: Path) -> dict:
    """What tells a temporary file once renamed: its inode (a rename keeps it), and its size and modification time
    (a copy of the folder — ``cp -a``, a restore — keeps those, not the inode)."""
    info = os.stat(temp)
    return {"inode": info.st_ino, "size": info.st_size, "mtime_ns": info.st_mtime_ns}


def _is_new(target: Path, entry: dict) -> bool:
    """Whether ``target`` is the temporary file ``entry`` names, renamed (here, or in a copy of the folder)."""
    try:
        info = os.lstat(target)
    except OSError:
        return False
    return info.st_ino == entry["inode"] or (
        (info.st_size, info.st_mtime_ns) == (entry.get("size"), entry.get("mtime_ns")) and stat.S_ISREG(info.st_mode))


def _drop(path: Path) -> None:
    try:
        os.unlink(path)
    except OSError:
        pass


def _relative(path: Path, folder: Path) -> str:
    return os.path.relpath(os.path.abspath(path), os.path.abspath(folder))
