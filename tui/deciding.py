"""Deciding on what the triage screen shows: whether the ledger can be written, the checks every decision
passes (the series still the one shown, its ledger record the one shown, the key columns and spellings confirmed),
and the one ``decide`` every decision goes through, appended at once (no widget).

``Deciding`` is a mixin of ``TriageSession``, which gives it ``book``, ``histories``, ``results``, ``keys``,
``key_columns``, ``spellings``, ``view``, ``_id``, ``index_of``, ``label``, ``reload_ledger`` and the records of
this screen's own decisions (``_written``, ``_mine``, ``_known``).
"""
from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

from fitcore import ledger
from fitcore.errors import PricefoldError
from fitcore.ledger.rules import check_latest, explained_codes
from fitcore.review.flags import SEVERITY

from .text import printable

DECISIONS = ("accept", "override", "hold")  # what stands until revoked (a note does not)


class Refused(PricefoldError):
    """A decision the screen will not record as asked; the message says why, in one line."""


@dataclass(frozen=True)
class Shown:
    """The series the screen showed, as it showed it: what a decision key acts on.

    ``series``: its index when shown; ``sid``: its key as canonical JSON (what identifies it);
    ``latest``: digest of the latest ledger record on it the screen had shown (None: none);
    ``flags``: its flag codes then; ``proposed``: the engine's choice; ``model``: the model standing then.
    """

    series: int
    sid: str
    key: dict
    fingerprint: str
    latest: str | None
    flags: tuple[str, ...]
    proposed: str | None
    model: str | None

    @property
    def stops(self) -> tuple[str, ...]:
        return tuple(code for code in self.flags if SEVERITY[code] == "stop")

    @property
    def to_explain(self) -> tuple[str, ...]:
        """The flags an accept must give a note for, by the ledger's own rule (``rules.explained_codes``)."""
        explained = explained_codes()
        return tuple(code for code in self.flags if code in explained)


class Deciding:
    """Recording the analyst's decisions on the series shown."""

    @property
    def writable(self) -> bool:
        """Whether decisions can be recorded: a broken or unverifiable ledger is read-only, and so is one
        this user may not write (said before a note is typed, not after)."""
        return self.book.state == ledger.INTACT and self.permitted

    @property
    def read_only_why(self) -> str:
        """Why nothing can be recorded, in words (the header and a refused key say the same)."""
        if self.book.replaced:  # not "broken": read afresh, its chain may well verify ('ledger verify': intact)
            return (f"the ledger changed under this screen: {self.book.problem.message}; open the screen again to "
                    "decide on it as it is now")
        if self.book.state != ledger.INTACT:
            return f"the ledger is {self.book.state} ({self.book.problem})"
        path = Path(self.book.path)
        if not path.exists() and not path.parent.is_dir():  # a mistyped folder is not a matter of permissions
            return f"the ledger's folder {printable(str(path.parent))} does not exist"
        try:  # a read-only mount is not a matter of permissions
            read_only_mount = bool(os.statvfs(path if path.exists() else path.parent).f_flag & os.ST_RDONLY)
        except OSError:
            read_only_mount = False
        return ("the ledger's file system is mounted read-only" if read_only_mount
                else "you may not write to the ledger file (permissions)")

    _permitted: bool | None = None
    tail_set_aside: Path | None = None  # where a decision here last moved an interrupted tail (the header says)

    @property
    def permitted(self) -> bool:
        """The OS lets this user append to the ledger (or make it, in its folder): asked once per ledger read
        (``reload_ledger``: the poll, and before every decision), not on each of the footer's checks of a key."""
        if self._permitted is None:
            path = Path(self.book.path)
            self._permitted = os.access(path, os.W_OK) if path.exists() else os.access(path.parent, os.W_OK | os.X_OK)
        return self._permitted

    def needs_reason(self, shown: Shown, action: str) -> bool:
        """An accept past a stop flag, or of a series whose signed curve no longer holds (``shifted``), needs a
        note (the trade's usual rule for exceptions; the ledger's rule too)."""
        return action == "accept" and bool(shown.to_explain)

    def decide(self, shown: Shown, action: str, model: str | None = None, note: str = "") -> dict:
        """Append one decision on the series ``shown`` showed; returns the record written.

        The entry ``supersedes`` the ledger record the screen last showed for that series, and carries the
        flags it showed: the ledger refuses it under its lock (``LedgerConflict``, one sentence) when another
        decision got there first, and applies its other rules (``LedgerError``).  ``Refused``: the screen
        will not ask (the series left the list under the cursor, or the ledger takes no appends), or the
        results' key columns name none of the ledger's series and the analyst has not confirmed starting a
        new set of them (``key_columns``; checked again under the writer's lock).
        """
        s = self.check_shown(shown, action)
        later = getattr(self.results, "later", None)
        if action in ("accept", "override") and later is not None:
            later.table()  # the interval parts a sign-off records (the screen asks only once they are in)
        if action == "accept":
            model = shown.proposed
        signed = self.signed_model(s, model) if action in ("accept", "override") else None
        entry = ledger.Entry(series=shown.key, action=action, fingerprint=shown.fingerprint,
                             results=self.results_digest, model=model, proposed=shown.proposed, note=note,
                             supersedes=shown.latest, flags=list(shown.flags), signed=signed,
                             last_date=self.last_date(s))
        self._known[shown.sid] = s

        def entries(records: list[dict]) -> list[ledger.Entry]:  # under the lock: others' records since count
            fresh = records[self._applied:] if self.book.generation == self._generation else records
            self._check_keys(self.key_columns.with_keys(r["series"] for r in fresh))
            if action != "revoke":
                self._check_spelling(s, [r["series"] for r in fresh])
            return [entry]
        try:
            [written] = self.book.append(entries, self.who)
        except PricefoldError:
            self._catch_up(pin="waits")  # a refused decision may still have read other analysts' records
            raise
        if self.book.tail_moved_to is not None:  # said on the header from now on (``status_line.tail_text``)
            self.tail_set_aside = self.book.tail_moved_to
        self._written.add(written["digest"])
        if action in DECISIONS:
            self._mine.append((shown.sid, written["digest"]))
        self._catch_up(pin=None)
        return written

    def check_shown(self, shown: Shown, action: str) -> int:
        """The ledger read again, then every refusal ``decide`` would meet before its write (read-only, key columns
        or spellings unconfirmed, the series decided by someone else since it was shown, or gone from the list):
        asked by ``decide`` and by the screen after a confirmation, before a note box opens.  Series ``s``."""
        self.reload_ledger(pin="waits")
        if not self.writable:
            raise Refused(f"{self.read_only_why}: nothing can be recorded")
        self._check_keys(self.key_columns.said)
        s = self.index_of(shown)
        if s < 0:
            raise Refused("this series is no longer in the results")
        if action != "revoke":
            self._check_spelling(s)
        check_latest(shown.key, shown.latest, self.histories.get(self._id(s)))  # the ledger's rule, said first
        if self.waiting and s == self.current and action != "revoke":
            raise Refused("this series has left the list you are working through; move on first")
        return s

    def _check_keys(self, said: str | None) -> None:
        """``Refused`` when the results' key columns name none of the ledger's series (``said``) and the analyst
        has not confirmed deciding under that: a decision would start a new set of series in the ledger."""
        if said is not None and said != self.key_columns.confirmed:
            raise Refused(f"these results' {said}: a decision here starts a new set of series in "
                          f"{self.key_columns.ledger_name}; press the key again to confirm it first")

    def _check_spelling(self, s: int, fresh: list[dict] = ()) -> None:
        """``Refused`` where series ``s`` is new to the ledger and looks like a series of it under another spelling
        (``spellings``; ``fresh``: records found under the writer's lock) that the analyst has not confirmed
        deciding beside: the decision would record a new series beside that one, whose decisions stay behind."""
        left = self.spellings.unconfirmed(s, fresh)
        if left:
            named = self.spellings.like_label(s) or "a series just recorded"
            raise Refused(f"{self.label(s)} looks like {named} in {self.spellings.ledger_name} under another "
                          "spelling, which you have not confirmed deciding beside; press the key again to confirm it "
                          "first")

    def undo_target(self) -> tuple[int, dict] | None:
        """The series and record of this screen's latest decision that is still its series' current one,
        wherever it is.  One that another decision has replaced since is not offered: the ledger takes a
        revoke by OS user, so on a shared account it would withdraw the other analyst's decision."""
        for sid, digest in reversed(self._mine):
            history = self.histories.get(sid)
            current = history.current if history else None
            if current is not None and current.get("digest") == digest and self._known.get(sid, -1) >= 0:
                return self._known[sid], current
        return None
