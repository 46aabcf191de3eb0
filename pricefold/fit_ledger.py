"""``fit --ledger``: the ledger read and verified in a second process while the fit loads and fits
(``LedgerAhead``), then the signed curves backtested on the rows since sign-off and ``shifted`` raised
(``backtest_against``), and the closing line (``backtest_line``).

The numbers come from ``fitcore.ledger.backtest``; the ledger is read through the verifying reader.
"""
from __future__ import annotations

import os
import signal
import sys
from pathlib import Path

from fitcore import ledger
from fitcore.ledger.elsewhere import same_file
from fitcore.collector import collector_paused

from .interrupts import held
from .ledger_cli import MISSING_TAIL, NOT_A_LEDGER, not_a_ledger


FIT_READS = "'fit --ledger' only reads it; a first cycle is fitted without --ledger"


def must_exist(path: Path, why: str) -> None:
    """A ledger a command reads but never starts must be there: a mistyped name is an error (exit 2), never
    an empty ledger (nothing signed, nothing carried) and never a new file."""
    if not os.path.lexists(path):
        raise ledger.LedgerError(f"{path}: no such ledger ({why})")


class LedgerAhead:
    """The ledger read and verified in a forked process while this one loads and fits the data: what the
    backtest needs comes back as columns (``fitcore.ledger.standing``).  Where processes cannot be
    forked, or the child fails, the ledger is read here instead, when the result is asked for."""

    def __init__(self, path: Path, outputs=()) -> None:
        must_exist(path, FIT_READS)
        for output in outputs:
            if same_file(Path(output), path):
                raise ledger.LedgerError(f"{output}: is the ledger; choose another results name")
        self.path, self.process, self.pipe = path, None, None
        try:
            import multiprocessing
            context = multiprocessing.get_context("fork")
            self.pipe, child = context.Pipe(duplex=False)
            self.process = context.Process(target=_read_ahead, args=(path, child, self.pipe, os.getpid()),
                                           daemon=True)
            with held():  # the child ignores Ctrl+C from its first step: this process answers it
                self.process.start()
            child.close()
        except (ValueError, OSError):  # no fork here: read it when asked
            self.process = None

    def result(self) -> tuple[dict, object]:
        """``(source, standing)``: the ledger's path, head and state, and its standing decisions."""
        said = None
        if self.process is not None:
            try:
                said = self.pipe.recv()
            except (EOFError, OSError):
                said = None
            self.process.join()
        if said is None:
            said = _read_now(self.path)
        state, problem, notes, head, standing, foreign = said
        if foreign:  # a results or data file given as --ledger: what every command says of it
            raise ledger.LedgerError(f"{self.path}: {NOT_A_LEDGER}; nothing was done")
        if state == ledger.BROKEN:
            raise ledger.LedgerError(f"{self.path}: {problem}; the chain is broken, so nothing was done "
                                     "(see 'pricefold ledger verify')")
        if state == ledger.UNVERIFIABLE:
            print(f"{self.path}: warning: keyed records and no key: read unverified", file=sys.stderr)
        for note in notes:
            print(f"{self.path}: {note}", file=sys.stderr)
        return {"path": str(self.path.resolve()), "head": head, "state": state}, standing


def _read_now(path: Path):
    from fitcore.ledger.standing import standing_of

    from .ledger_cli import ledger_key
    with collector_paused(freeze=True):  # one pass over 100,000 records' objects cost 0.3 s
        book = ledger.Ledger(path, ledger_key())
        return (book.state, str(book.problem) if book.problem else None, [str(n) for n in book.notes],
                book.head_text, standing_of(book.histories), not_a_ledger(book))


def _read_ahead(path: Path, pipe, ours, parent: int) -> None:
    """The forked reader: ``_read_now`` sent to the parent.  Ctrl+C reaches every process of the terminal's
    group: the parent answers it (one line, exit 130), so the child ignores it.  The child ends when the
    parent does, even killed with -9 (Linux: the parent-death signal; elsewhere, the write to a pipe
    nobody reads fails, as the parent's end is closed here too)."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # blocked since the fork (``held``): none came before this
    signal.pthread_sigmask(signal.SIG_UNBLOCK, {signal.SIGINT})
    _die_with(parent)
    ours.close()  # the parent's end, inherited: held open here, a write would wait for ever
    try:
        said = _read_now(path)
    except BaseException:  # the parent reads it itself and reports what goes wrong
        said = None
    try:
        pipe.send(said)
    except OSError:  # the parent is gone (or stopped reading): nobody to tell
        pass
    finally:
        pipe.close()


def _die_with(parent: int) -> None:
    """Have the system end this process when ``parent`` ends (Linux ``prctl(PR_SET_PDEATHSIG, SIGKILL)``);
    end it now if the parent is gone already."""
    import ctypes
    try:
        ctypes.CDLL(None, use_errno=True).prctl(1, signal.SIGKILL)  # 1: PR_SET_PDEATHSIG
    except (OSError, AttributeError):  # not Linux: the closed pipe ends it instead
        pass
    if os.getppid() != parent:
        os._exit(0)


def backtest_against(ahead: LedgerAhead, results, diagnosis, thresholds):
    """``(diagnosis with 'shifted', backtest, missed)`` of ``results`` (a fit, rows loaded) against the ledger;
    ``missed``: whether not one of the ledger's signed series is in the results (said in a warning line)."""
    from fitcore.data.keys import SeriesKeys
    from fitcore.ledger.backtest import backtest
    from fitcore.ledger.key_columns import mismatch, none_shared
    from fitcore.review.flags import mark_shifted
    source, standing = ahead.result()
    said = mismatch(list(results.data.key_names), standing.series, str(ahead.path))
    alike, looks = None, None
    if said is None and len(standing):  # the same key columns: is any signed series among these?
        keys = SeriesKeys.of(results.data)
        at = keys.indices_of(standing.series)
        said = none_shared(bool((at >= 0).any()), len(standing), str(ahead.path), "signed series")
        looks = signed_alike(keys, standing.series, at)
        alike = looks.said(str(ahead.path), "signed series")
    if said:  # the fit stands on its own; only the backtest finds nothing (and carry refuses these results)
        print(f"pricefold fit: warning: {'; '.join(filter(None, (said, alike)))}; nothing was backtested",
              file=sys.stderr)
    elif alike:  # the others are backtested; these read as new series, their signed spelling as gone
        print(f"pricefold fit: warning: {alike}; those were not backtested", file=sys.stderr)
    if said is None and len(standing):  # signed series gone from the data (renamed, or another range): a note
        from fitcore.ledger.missing import missing_at, results_values
        gone = missing_at(standing.series, at, keys.names)
        gone = (gone.beside(results_values(keys)) if len(gone) else gone).said(str(ahead.path))
        if gone:
            print(f"pricefold fit: note: {gone}; {MISSING_TAIL}", file=sys.stderr)
    found = backtest(results, standing, thresholds, source)
    return mark_shifted(diagnosis, found), found, said is not None


def signed_alike(keys, signed: list[dict], at):
    """``fitcore.ledger.respelling`` of the results' series (``keys``, a ``SeriesKeys``) against the ledger's
    signed series ``signed``, found among them at ``at`` (-1: missing): only the series new to those and the
    missing ones are looked at (none: nothing is)."""
    import numpy as np

    from fitcore.arrays import integers, objects
    from fitcore.ledger.respelling import NONE, among
    hit = np.zeros(len(keys), dtype=bool)
    hit[at[at >= 0]] = True
    if hit.all() or (at >= 0).all():
        return NONE
    new = np.flatnonzero(~hit)
    values = list(zip(*(objects(keys.columns[name].take(integers(new))).tolist() for name in keys.names)))
    names = set(keys.names)
    missing = [j for j in np.flatnonzero(at < 0).tolist() if signed[j].keys() == names]
    return among(values, new.tolist(), [tuple(signed[j][n] for n in keys.names) for j in missing], missing, keys.names)


def backtest_line(found, missed: bool = False) -> str:
    """One line for the fit's summary: signed series on changed data, by backtest outcome (``missed``: none
    of the ledger's signed series is in these results, as the warning line said)."""
    counts = found.counts()
    total = sum(counts.values())
    if missed:
        return f"ledger: none of its signed series is in these results (head {found.source['head'][:20]}…)"
    if not total:
        return f"ledger: no signed series has new data (head {found.source['head'][:20]}…)"
    parts = " · ".join(f"{name} {count:,}" for name, count in sorted(counts.items()))
    return f"ledger: {total:,} signed series on changed data — backtest {parts}; shifted {int(found.shifted.sum()):,}"


# -- show --ledger ---------------------------------------------------------------------------------------
