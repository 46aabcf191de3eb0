"""Ctrl+C during ``pricefold fit`` (and the ledger commands, ``report``, ``show``), seen once and never lost, and
never raised where it can wedge a thread.
A ``kill`` (SIGTERM) or a closed SSH session (SIGHUP) the same way: before, either ended the process at once,
silently, its staged files left behind until a later run; now the run stops at the next safe point, drops what
it staged and says so (``Stopped``: exit 128 + the signal's number).

Python turns SIGINT into ``KeyboardInterrupt`` at the main thread's next step, wherever that is.  While
another thread of the fit runs (the warm-up, the engine's second chunk), that is unsafe: raised inside an
import's lock it left the module lock taken (the main thread then waited on it for ever), raised just after
numba's compiler lock was taken it left that lock held (the warm-up thread waited on it, and the main thread
on the warm-up), and raised inside pyarrow's conversion it was swallowed (the fit went on to write its
results).  So inside ``noticed`` a SIGINT is recorded, and raised at once only when the main thread is the
only one; otherwise ``check`` raises it at the next safe point (the data read, each fitted chunk, before
anything is put in place), and an error that follows a swallowed interrupt is reported as the interrupt.
"""
from __future__ import annotations

import signal
import threading
from contextlib import contextmanager

_seen = 0  # the signal recorded inside ``noticed`` (0: none)
_written: list[str] = []  # the files a run has put in place (``in_place``): a signal after them only recorded
_recorded: list[str] = []  # the ledger appends it made (``recorded``), "139 records in L.jsonl in full (#156–#294)"
NOTICED = ("SIGINT", "SIGTERM", "SIGHUP")
_prog = ["pricefold"]  # who says it: "pricefold ledger" once ``main`` knows the command (``named``)


class Stopped(KeyboardInterrupt):
    """The run stopped by ``signum`` (SIGINT: Ctrl+C; SIGTERM: ``kill``; SIGHUP: the terminal went away), after
    putting ``written`` in place and making the ledger appends ``recorded`` (none: nothing was written)."""

    def __init__(self, signum: int = signal.SIGINT, written: list[str] | None = None,
                 recorded: list[str] | None = None) -> None:
        super().__init__()
        self.signum = signum
        self.written = written or None
        self.recorded = recorded or None


def named(prog: str) -> None:
    """The command a signal line names (``pricefold fit``), however late it comes."""
    _prog[0] = prog


def stopped_line(signum: int, written=None, recorded=None) -> str:
    """The one line every command ends on when a signal stops it: how, and what stands — "pricefold ledger:
    interrupted; after recording 139 records in L.jsonl in full (#156–#294)", "pricefold fit: stopped by SIGTERM;
    after writing r.json in full", "…; nothing was written"."""
    how = "interrupted" if signum == signal.SIGINT else f"stopped by {signal.Signals(signum).name}"
    said = [f"after recording {', '.join(recorded)}"] if recorded else []
    if written:
        said.append(f"after writing {', '.join(written)} in full")
    return f"{_prog[0]}: {how}; {'; '.join(said) or 'nothing was written'}"


def _in_place() -> bool:
    return bool(_written or _recorded)


def _on_interrupt(signum, frame) -> None:
    global _seen
    _seen = _seen or signum
    if threading.active_count() == 1 and not _in_place():  # no other thread could wait on a lock this one leaves
        raise Stopped(signum)


_late: list = []  # (signum, files) of a signal after the block ended, its files in place (``until_exit``)
_until_exit = False  # the process ends with the command (``cli.entry``): handlers may stay until then


def until_exit() -> None:
    """The installed command: a fit that put its files in place keeps recording signals until the process ends,
    and ``late`` says one (before: one in the moment after the block — waiting for threads, exit functions —
    killed it, exit 143, no line, the new results complete).  Not for ``main`` called in process."""
    global _until_exit
    _until_exit = True


def late() -> tuple[int, list[str], list[str]] | None:
    """(signum, files in place, ledger appends made) of a signal recorded after the block, or None."""
    return _late[0] if _late else None


def _after(signum, frame) -> None:
    if not _late:
        _late.append((signum, list(_written), list(_recorded)))
        return
    import os  # a second one: the process was asked twice, so it ends as it would have (nothing left staged)
    signal.signal(signum, signal.default_int_handler if signum == signal.SIGINT else signal.SIG_DFL)
    os.kill(os.getpid(), signum)



def in_place(paths: list[str]) -> None:
    """The run's files are in place: a signal from here on is recorded, and ``check`` at the run's end says it came
    after them (before: one in the moment between the files and the process's end killed it, exit 143, no line,
    the new results complete)."""
    _written[:] = paths


def recorded(what: str) -> None:
    """A ledger append is whole and synced (``what``: its records, where, in words): as ``in_place``, a signal
    from here on is recorded, and the command's line says it came after them."""
    _recorded.append(what)


@contextmanager
def noticed():
    """Record every SIGINT, SIGTERM and SIGHUP from here to the end of the block (main thread, each with its
    usual handling in place — Python's for SIGINT, the default action for the others —: elsewhere nothing
    changes)."""
    global _seen
    usual = {signal.SIGINT: signal.default_int_handler}
    numbers = [number for number in (getattr(signal, name, None) for name in NOTICED) if number is not None]
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    # each taken over only from its usual handling: a job started with SIGINT ignored (``cmd &`` in a script)
    # keeps ignoring Ctrl+C, and still stops cleanly on a kill (before: neither handled, the kill silent)
    numbers = [number for number in numbers if signal.getsignal(number) is usual.get(number, signal.SIG_DFL)]
    if not numbers:
        yield
        return
    _seen, _written[:], _recorded[:] = 0, [], []
    previous = {number: signal.signal(number, _on_interrupt) for number in numbers}
    try:
        yield
    except BaseException as exc:
        if _seen and not isinstance(exc, KeyboardInterrupt):
            raise Stopped(_seen, list(_written), list(_recorded)) from None
        raise
    finally:
        keep = _until_exit and _in_place() and not _seen  # done, files in place: recorded until the end
        for number, handler in previous.items():
            signal.signal(number, _after if keep else handler)
        _seen = 0
        if not keep:  # (kept: the files and appends ``late`` names)
            _written[:], _recorded[:] = [], []


def check() -> None:
    """Raise ``Stopped`` if a signal came inside ``noticed``, even one something swallowed (with the files in place
    by then, if any)."""
    if _seen:
        raise Stopped(_seen, list(_written), list(_recorded))


def checked(progress):
    """``progress(done, total)`` (a chunk fitted) that first raises an interrupt recorded meanwhile."""
    def call(done: int, total: int) -> None:
        check()
        progress(done, total)
    return call


@contextmanager
def held():
    """SIGINT held back (blocked) for the block: a process forked inside it starts with SIGINT blocked and
    can ignore it before it could arrive; here, one that came meanwhile is delivered at the end."""
    try:
        blocked = signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT})
    except (AttributeError, OSError, ValueError):  # no signal masks here
        yield
        return
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, blocked)
