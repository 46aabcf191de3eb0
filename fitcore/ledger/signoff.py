"""Where the sign-off stands: a results file and its ledger gathered into counts, rows and exceptions.

Pure data for a reviewer's report (or anything else that summarises a sign-off): each series'
status replayed from the ledger, carried decisions, who decided how many and when, which
decisions were bulk ones (``accept-unflagged``, ``carry``) and which a person made one by one,
and which series deserve a detailed look.  No file, clock or markup here.
"""
from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass, field
from datetime import datetime
from functools import cached_property

import numpy as np

from ..data.keys import SeriesKeys
from ..fit.results import Results
from ..review.flags import CODES, SEVERITY, Diagnosis, mark_stale
from .replay import SeriesHistory, replay

STATUSES = ("accepted", "overridden", "held", "pending", "stale")
STATE_WORDS = ("intact", "broken", "unverifiable", "absent")
BULK_ACTIONS = ("carry",)  # always recorded for many series at once
LEGACY_GAP_MS = 5  # /1 records carry no batch marker: accepts by one analyst this close together came from one command
DETAIL_LIMIT = 200  # stop-flagged series shown in full, first in attention order


@dataclass(frozen=True)
class LedgerView:
    """A ledger as read for a report: its verification ``state`` (one of ``STATE_WORDS``), the first
    ``problem`` in words (with its line), its ``head`` (``SEQ:DIGEST`` of the last whole record), the
    ``kind`` of digest and the whole ``records``, oldest first."""

    path: str
    state: str
    records: tuple = ()
    head: str | None = None
    problem: str | None = None
    kind: str | None = None


@dataclass(frozen=True)
class BulkGroup:
    """Decisions recorded for many series by one command: who, what, how many, when."""

    analyst: str
    action: str
    count: int
    first: str
    last: str
    note: str


@dataclass(frozen=True)
class AnalystTally:
    """One analyst's records in the ledger: how many of each action, and between which times."""

    analyst: str
    actions: dict
    first: str
    last: str

    @property
    def total(self) -> int:
        return sum(self.actions.values())


@dataclass(frozen=True, eq=False)
class Signoff:
    """The sign-off of S series.

    ``status``: (S,) index into ``STATUSES``; ``carried``: (S,) standing by a carried decision (accepted or
    overridden: a carry has the status of the decision it carries);
    ``individual``: (S,) a person decided the series one by one (any record that is not part of a
    bulk command); ``noted``: (S,) the series has a ``note`` record; ``histories``: series index →
    its ledger history (only series the ledger names); ``diagnosis``: flags with ``stale`` raised
    from the ledger; ``unmatched``: records naming series these results do not hold.
    """

    results: Results
    diagnosis: Diagnosis
    status: np.ndarray
    carried: np.ndarray
    individual: np.ndarray
    noted: np.ndarray
    histories: dict = field(repr=False)
    bulk: tuple = ()
    analysts: tuple = ()
    unmatched: int = 0
    bulk_seqs: frozenset = frozenset()

    def counts(self) -> dict[str, int]:
        """Series per status, plus ``carried`` (a part of ``accepted``: accepts carried forward),
        ``carried_overridden`` (a part of ``overridden``: overrides carried forward), ``stale_overridden`` and
        ``stale_held`` (parts of ``stale``: the decision standing on the older data is an override, or a hold —
        an approver reading "0 overridden" would otherwise not learn of them), ``stale_newer`` (a part of
        ``stale``: decided on newer data than these results, ``newer``) and ``total``."""
        tally = np.bincount(self.status, minlength=len(STATUSES))
        out = dict(zip(STATUSES, tally.tolist()))
        out["carried"] = int((self.carried & (self.status == STATUSES.index("accepted"))).sum())
        out["carried_overridden"] = int((self.carried & (self.status == STATUSES.index("overridden"))).sum())
        older = ~self.newer
        out["stale_overridden"] = int(((self.stale_action == "override") & older).sum())
        out["stale_held"] = int(((self.stale_action == "hold") & older).sum())
        out["stale_newer"] = int(self.newer.sum())
        out["total"] = int(len(self.status))
        return out

    @cached_property
    def newer(self) -> np.ndarray:
        """(S,) bool: stale, and the decision standing on it was made on newer data than these results' rows
        (``rules.decided_on_newer``, as ``show --ledger`` and the screen judge it): older results read with a
        later cycle's ledger, whose decisions are not "on older data"."""
        from ..review.intervals import last_dates
        from .rules import decided_on_newer
        out = np.zeros(len(self.status), dtype=bool)
        stale = np.flatnonzero(self.status == STATUSES.index("stale"))
        if not len(stale):
            return out
        days = last_dates(self.results)
        prints = self.results.data.fingerprints
        for s in stale.tolist():
            day = None if days is None or np.isnat(days[s]) else str(days[s])
            out[s] = decided_on_newer(self.results.data.key_of(s), str(prints[s]), day, self.histories.get(s)) is not None
        return out

    @cached_property
    def stale_action(self) -> np.ndarray:
        """(S,) object: for a stale series, the action of the decision standing on the older data (an override
        carried counts as one); None elsewhere.  Made once: the counts and the detailed set ask it again and again."""
        out = np.full(len(self.status), None, dtype=object)
        for s in np.flatnonzero(self.status == STATUSES.index("stale")).tolist():
            decision = self.histories[s].decision if s in self.histories else None
            out[s] = decision["action"] if decision is not None else None
        return out

    def flag_counts(self) -> dict[str, int]:
        return self.diagnosis.counts()

    def stop_flagged(self) -> np.ndarray:
        """(S,) bool: at least one stop flag (``stale`` included)."""
        return self.diagnosis.n_stop() > 0

    def table_rows(self) -> np.ndarray:
        """Series for the decisions table, in attention order: decided one by one, or stop-flagged."""
        order = self.diagnosis.attention_order()
        return order[(self.individual | self.stop_flagged())[order]]

    def detailed(self, limit: int = DETAIL_LIMIT) -> tuple[np.ndarray, np.ndarray, int]:
        """``(decided, flagged, more)``: every overridden, held or noted series (an override or hold standing
        on older data too: stale); then at most ``limit`` further stop-flagged series (attention order); and how
        many stop-flagged series are left out."""
        order = self.diagnosis.attention_order()
        decided = (self.status == STATUSES.index("overridden")) | (self.status == STATUSES.index("held")) | self.noted
        decided |= np.isin(self.stale_action, ["override", "hold"])
        flagged = self.stop_flagged() & ~decided
        rest = order[flagged[order]]
        return order[decided[order]], rest[:limit], max(len(rest) - limit, 0)

    def history(self, s: int) -> list[dict]:
        history = self.histories.get(int(s))
        return history.records if history else []

    def standing(self, s: int) -> dict | None:
        """The decision standing on series ``s`` (None when pending)."""
        history = self.histories.get(int(s))
        return history.current if history else None

    def model_index(self, s: int) -> int:
        """The candidate that stands for series ``s``: the decided model, else the proposal while pending
        (-1: none — a hold signs no curve, or no candidate could be fitted)."""
        current = self.standing(s)
        if current is not None and current.get("action") == "hold":
            return -1
        names = self.results.names
        if current is not None and current.get("model") in names:
            return names.index(current["model"])
        return int(self.results.chosen[s])

    def carried_decision(self, s: int) -> dict | None:
        """The accept or override a standing ``carry`` on series ``s`` carries forward: who decided, when, with
        which note (None: no carry stands)."""
        history = self.histories.get(int(s))
        return history.carried if history else None

    def note_record(self, s: int) -> dict | None:
        """The latest record with a non-empty note on series ``s`` (any action; its own analyst and time), or None."""
        return next((record for record in reversed(self.history(s)) if record.get("note")), None)

    def last_note(self, s: int) -> str:
        """The latest non-empty note on series ``s`` (any action), or ''."""
        record = self.note_record(s)
        return str(record["note"]) if record else ""

    def is_bulk(self, record: dict) -> bool:
        return record.get("seq") in self.bulk_seqs


def gather(results: Results, diagnosis: Diagnosis, records: list[dict] | tuple,
           histories: dict[str, SeriesHistory] | None = None) -> Signoff:
    """Replay ``records`` onto the series of ``results``: statuses, carries, bulk groups, tallies.
    ``histories``: their replay, when the caller has made it already (``replay(records)``)."""
    records = [r for r in records if isinstance(r.get("series"), dict) and r.get("action")]
    n_s = results.n_series
    histories = replay(records) if histories is None else histories
    keys = [history.records[0]["series"] for history in histories.values()]
    where = SeriesKeys.of(results.data).indices_of(keys) if keys else np.zeros(0, np.int64)
    groups, bulk_seqs = bulk_groups(records)
    status = np.full(n_s, STATUSES.index("pending"), dtype=np.int8)
    carried = np.zeros(n_s, dtype=bool)
    individual = np.zeros(n_s, dtype=bool)
    noted = np.zeros(n_s, dtype=bool)
    by_index: dict[int, SeriesHistory] = {}
    unmatched = 0
    prints = results.data.fingerprints  # Arrow text (results read from a file) or a list: one conversion, not S
    prints = prints.to_pylist() if hasattr(prints, "to_pylist") else prints
    for history, s in zip(histories.values(), where.tolist()):
        if s < 0:
            unmatched += len(history.records)
            continue
        by_index[s] = history
        word = history.status(prints[s])
        status[s] = STATUSES.index(word) if word in STATUSES else STATUSES.index("accepted")
        current = history.current
        carried[s] = word != "stale" and current is not None and current.get("action") == "carry"
        individual[s] = any(r.get("seq") not in bulk_seqs for r in history.records)
        noted[s] = any(r.get("action") == "note" for r in history.records)
    for array in (status, carried, individual, noted):
        array.flags.writeable = False
    stale = status == STATUSES.index("stale")
    marked = mark_stale(diagnosis, stale) if stale.any() or diagnosis.flagged("stale").any() else diagnosis
    return Signoff(results, marked, status, carried, individual, noted, by_index, tuple(groups),
                   tuple(tallies(records)), unmatched, frozenset(bulk_seqs))


def _millis(stamp: str) -> float | None:
    try:
        return datetime.fromisoformat(str(stamp).replace("Z", "+00:00")).timestamp() * 1000
    except ValueError:
        return None


def _run_key(record: dict):
    """What ties a record to the others of one bulk command (None: a decision on its own)."""
    batch = record.get("batch")
    if isinstance(batch, dict) and batch.get("id") and int(batch.get("size") or 1) > 1:
        return ("batch", batch["id"])
    if record.get("action") in BULK_ACTIONS:
        return ("bulk", record.get("action"), record.get("os_user"), record.get("analyst"), record.get("results"))
    if "batch" not in record and record.get("action") == "accept":
        return ("legacy", record.get("os_user"), record.get("analyst"), record.get("note"), record.get("results"))
    return None


def bulk_groups(records: list[dict]) -> tuple[list[BulkGroup], set]:
    """Runs of records written by one bulk command, and the seqs of every record in them.

    A ``/2`` batch is marked on its records; a ``carry`` is bulk by nature; ``/1`` records carry no
    marker, so a run of two or more accepts by one analyst with one note, each stamped within
    ``LEGACY_GAP_MS`` of the one before, counts as one command (no person decides that fast).
    """
    runs: list[list[dict]] = []
    key_before, time_before = None, None
    for record in records:
        key, at = _run_key(record), _millis(record.get("at"))
        joins = key is not None and key == key_before and (
            key[0] != "legacy" or (at is not None and time_before is not None and at - time_before <= LEGACY_GAP_MS))
        if joins:
            runs[-1].append(record)
        else:
            runs.append([record])
        key_before, time_before = key, at
    groups, seqs = [], set()
    for run in runs:
        key = _run_key(run[0])
        if key is None or (key[0] == "legacy" and len(run) < 2):
            continue
        seqs.update(r.get("seq") for r in run)
        groups.append(BulkGroup(str(run[0].get("analyst", "")), "accept-unflagged" if run[0]["action"] == "accept"
                                else str(run[0]["action"]), len(run), str(run[0].get("at", "")),
                                str(run[-1].get("at", "")), run_note(run)))
    return groups, seqs


def run_note(run: list[dict]) -> str:
    """A bulk command's note: the one every record of it carries, or, where they differ (a carry says each
    series' own plan price move), how many carry one and the first — not the first as if it were every one's
    (a trial's report gave 194 carried series "to a new plan price: 1.46 → 1.65")."""
    notes = [str(record.get("note") or "") for record in run]
    if len(set(notes)) == 1:
        return notes[0]
    said = [note for note in notes if note]
    return f"a note of its own on {len(said):,} of the {len(run):,} series, e.g. {said[0]}"


def tallies(records: list[dict]) -> list[AnalystTally]:
    """Per analyst (most records first): records by action, first and last time.  An analyst is a display name
    with the OS user beside it where the two differ (``ana (root)``, as ``ledger show`` writes it): the name is
    free text, the OS user is who the system says appended — two names of one user, or one name of two, show."""
    actions: dict[str, dict] = defaultdict(lambda: defaultdict(int))
    times: dict[str, list] = {}
    for record in records:
        name, user = str(record.get("analyst", "")), record.get("os_user")
        if user and user != name:
            name = f"{name} ({user})"
        actions[name][str(record["action"])] += 1
        at = str(record.get("at", ""))
        span = times.setdefault(name, [at, at])
        span[0], span[1] = min(span[0], at), max(span[1], at)
    out = [AnalystTally(name, dict(counts), *times[name]) for name, counts in actions.items()]
    return sorted(out, key=lambda t: (-t.total, t.analyst))


def flag_table(signoff: Signoff) -> list[tuple[str, str, int]]:
    """``(code, severity, series)`` for every flag raised, stop flags first, in the flags' own order."""
    counts = signoff.flag_counts()
    ordered = sorted(CODES, key=lambda code: SEVERITY[code] != "stop")
    return [(code, SEVERITY[code], counts[code]) for code in ordered if counts.get(code)]

