"""Whether a results file's backtest was made against another ledger than the one it is read with.

``fit --ledger`` records the ledger it backtested against in the results' header (``ledger``: its path and
head).  Read with another ledger (a copy, a colleague's), that backtest and its ``shifted`` flags speak of
the other ledger's signers: ``ledger carry`` refuses such results, ``show --ledger`` and the triage screen
leave both out.  ``backtested_elsewhere`` is the one rule the three ask.

Read with the same ledger, the results still name the record the fit read last (``ledger.head``): when the
ledger no longer holds it — records cut from its end, an older copy put in its place — what the results say
of the ledger (their backtest, what changed since the fit) speaks of records that are gone, while the chain
itself verifies.  ``head_gone`` says it, for ``carry`` and ``export`` to refuse and ``show`` and ``report``
to put first.

Read with the same ledger, one series' backtest may still test a decision that no longer stands: a hold, a
revoke, an accept or override recorded since the fit (in an open screen, by another analyst).  Its numbers and
its ``shifted`` flag then speak of a decision nobody stands by: ``StandingNow`` is the one rule by which ``show
--ledger``, ``ledger export``, the report and the screen (on opening, and as records arrive) leave them out.
"""
from __future__ import annotations

from collections.abc import Iterable
from pathlib import Path

import numpy as np

from ..text import clean


def same_file(a: Path, b: Path) -> bool:
    """Whether two paths name one file (the same path resolved, or the same file through a link)."""
    try:
        return a.resolve() == b.resolve() or (a.exists() and b.exists() and a.samefile(b))
    except OSError:
        return False


def fitted_elsewhere(fitted: str | None, ledger_path: Path) -> str | None:
    """The ledger results were fitted against (``fitted``: their header's ``ledger`` path, None without one) when
    it is another file than ``ledger_path``; None otherwise.  The one comparison behind every command's words for
    it: the screen's header line, triage's refusal of a default ledger, and ``backtested_elsewhere``."""
    return None if not fitted or same_file(Path(fitted), ledger_path) else str(fitted)


def fitted_ledger(header: dict) -> str | None:
    """The path of the ledger a results ``header`` says ``fit --ledger`` read; None: fitted without one."""
    return (header.get("ledger") or {}).get("path")


def backtested_elsewhere(results: Path, header: dict, ledger_path: Path) -> str | None:
    """"RESULTS: backtested against L, not OTHER" when the results (``header``, from the file ``results``) were
    fitted with ``--ledger`` on another ledger than ``ledger_path``; None: on this one, or without a ledger."""
    fitted = fitted_elsewhere(fitted_ledger(header), ledger_path)
    if fitted is None:
        return None
    return f"{results}: backtested against {clean(fitted)}, not {ledger_path}"


def without_backtest(record: dict) -> dict:
    """A results record less its backtest and its ``shifted`` flag (of another ledger's signed curves, or of a
    decision that no longer stands: ``StandingNow``)."""
    flags = [flag for flag in record["flags"] if flag["code"] != "shifted"]
    return {**record, "backtest": None, "flags": flags}


class StandingNow:
    """The decisions standing now, for asking whether a backtest's tested decision is among them.

    A backtest names the decision it tested by digest (``decision``) and the accept or override that decision
    stands for (``carries``: itself, or what a carry carries; None in results made before it was kept).  That
    decision still stands where it is a series' current record, or where the current record is a carry of what it
    stands for (carried to newer data since the fit: the decision tested, standing on).  A digest names one
    record of one series, so no series key is needed: ``currents`` are the current records (None: nothing
    stands) of the ledger's series, or at least of those asked about."""

    __slots__ = ("digests", "carried")

    def __init__(self, currents: Iterable[dict | None]) -> None:
        currents = [current for current in currents if current is not None]
        self.digests = {current["digest"] for current in currents}
        self.carried = {current.get("carries") for current in currents if current["action"] == "carry"}

    def superseded(self, decision: str | None, carries: str | None = None) -> bool:
        """Whether the backtest of ``decision`` (a digest; None: nothing tested) tested a decision that no
        longer stands."""
        if not decision:
            return False
        return decision not in self.digests and (carries or decision) not in self.carried

    def superseded_of(self, decision, carries=None) -> np.ndarray:
        """``superseded`` of each backtest: (n,) bool from its ``decision`` and ``carries`` (each n values; None
        where nothing was tested, or not kept)."""
        carries = [None] * len(decision) if carries is None else carries
        return np.fromiter((self.superseded(d, c) for d, c in zip(decision, carries)), dtype=bool,
                           count=len(decision))


# What ``show`` and ``report`` add: they read on, the statuses from the ledger as it is now.
HEAD_GONE_TAIL = "the records after it, which the results' backtest read, are not in it now (fit again with --ledger)"


def head_gone(results: Path, header: dict, records: list[dict], ledger_path: Path) -> str | None:
    """"L no longer holds record 294:1a2b3c4d5e6f…, the last one 'fit --ledger' read for RESULTS (it now ends
    at 155:…: records were removed from its end, or an older copy put in its place)" when the results (``header``)
    were fitted with ``--ledger`` on this ledger and its ``records`` (as read now, verified) no longer hold the
    head that fit recorded; None otherwise (no ledger recorded, another ledger's: ``backtested_elsewhere``)."""
    from .records import GENESIS
    source = header.get("ledger")
    if not source or not same_file(Path(source["path"]), ledger_path):
        return None
    read = str(source.get("head", ""))
    seq, _, digest = read.partition(":")
    if not seq.isdigit() or len(digest) != 64:
        return f"{results} names no ledger head it read ({clean(read[:20])!r}), so it cannot be checked against {ledger_path}"
    seq = int(seq)
    held = digest == GENESIS if seq == 0 else (seq <= len(records) and records[seq - 1].get("seq") == seq
                                               and records[seq - 1].get("digest") == digest)
    if held:
        return None
    last = f"{records[-1]['seq']}:{records[-1]['digest'][:12]}…" if records else "0 (it is empty)"
    why = ("records were removed from its end, or an older copy put in its place" if seq > len(records) else
           f"record {seq} is now another one: the file was replaced")
    return (f"{ledger_path} no longer holds record {seq}:{digest[:12]}…, the last one 'fit --ledger' read for "
            f"{results} (it now ends at {last}: {why})")
