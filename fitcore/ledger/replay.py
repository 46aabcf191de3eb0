"""A series' status, derived by replaying the ledger (a pure function of its records)."""
from __future__ import annotations

from dataclasses import dataclass, field

from .fastjson import canonical_text, text_object
from .records import SCHEMA

STATUS_OF = {"accept": "accepted", "override": "overridden", "hold": "held", "carry": "accepted"}
# A carry stands as the decision it carries: an accept carried is accepted, an override carried is overridden
# (the analyst's own choice of curve, not the proposal, still stands; "carry" above is only the fallback for
# a carry whose decision the series' history does not hold, which the append rules never let in).


def series_id(key: dict) -> str:
    """A stable text identity for a series key (canonical JSON, as ``json`` writes it).

    Keys of text values are remembered (a ledger names each series many times: replay, rules, lookups;
    encoding each time was a third of opening a 100,000-record ledger)."""
    try:
        probe = tuple(key.items())
        known = _IDS.get(probe)  # a hit is a key of text: only those are kept, and "1" != 1
        if known is not None:
            return known
    except (AttributeError, TypeError):  # not a mapping of text: encoded (or refused) as it always was
        return canonical_text(key)
    if not all(type(v) is str and type(k) is str for k, v in probe):
        return canonical_text(key)
    known = text_object(key)
    if len(_IDS) >= _IDS_LIMIT:
        _IDS.clear()
    _IDS[probe] = known
    return known


_IDS: dict[tuple, str] = {}
_IDS_LIMIT = 1 << 20


@dataclass
class SeriesHistory:
    """What the ledger says about one series: every record, and the decisions still standing."""

    records: list[dict] = field(default_factory=list)
    standing: list[dict] = field(default_factory=list)

    @property
    def current(self) -> dict | None:
        return self.standing[-1] if self.standing else None

    @property
    def latest(self) -> dict | None:
        """The series' latest record of any action (what a new decision ``supersedes``)."""
        return self.records[-1] if self.records else None

    @property
    def carried(self) -> dict | None:
        """The accept or override the standing ``carry`` carries forward (None: no carry stands, or its
        decision is not in this history)."""
        current = self.current
        if current is None or current["action"] != "carry":
            return None
        return carried_by(self.records, current)

    @property
    def decision(self) -> dict | None:
        """The analyst's decision that stands: the standing record, or what a standing carry carries."""
        return self.carried or self.current

    @property
    def revoked(self) -> dict | None:
        """The revoke after which no decision has been recorded on the series while one still stands on other
        data than the decision it withdrew: its latest record but notes (a note decides nothing), where that is
        a revoke and what stands again was made on other data than the revoke's (the withdrawn decision's).
        What stands then is a fallback left when a person withdrew a decision, not a sign-off made on those
        data: ``ledger carry`` leaves the series for a person (``due.revoked_due``) and the rules refuse to
        carry it.  An override withdrawn back to the carry it replaced on the same data is no such fallback
        (the carry stood on those data, seen; a trial read "revoked" beside it).  None otherwise, or pending."""
        if not self.standing:
            return None
        for record in reversed(self.records):
            if record["action"] != "note":
                if record["action"] != "revoke" or record.get("fingerprint") == self.standing[-1].get("fingerprint"):
                    return None
                return record
        return None

    def standing_model(self, fingerprint: str) -> str | None:
        """The candidate that stands on the data ``fingerprint`` names by an analyst's decision: the model of
        the accept or override standing on these very data (made on them, or carried to them); None where none
        does (pending, held, decided on other data): the results' proposal is then the series' model.  An
        accept names the proposal of the results it was made on, which results fitted otherwise on the same
        data (another seed, fold order or rule) may not propose."""
        if self.status(fingerprint) not in ("accepted", "overridden"):
            return None
        return self.standing[-1].get("model")

    def status(self, fingerprint: str | None = None) -> str:
        """pending, accepted, overridden, held — or stale when the data changed since the decision.  A carry
        has the status of the decision it carries (an override carried forward is still overridden).  Read
        without the properties (``current``, ``decision``): a screen asks it of every series (100,000: 0.1 s)."""
        if not self.standing:
            return "pending"
        current = self.standing[-1]
        if fingerprint is not None and current.get("fingerprint") != fingerprint:
            return "stale"
        if current["action"] == "carry":
            return STATUS_OF[(carried_by(self.records, current) or current)["action"]]
        return STATUS_OF[current["action"]]


def carried_by(records: list[dict], carry: dict) -> dict | None:
    """The accept or override ``carry`` names (``carries``) among a series' ``records`` (None: not there)."""
    digest = carry.get("carries")
    return next((r for r in reversed(records) if r.get("digest") == digest and r["action"] in ("accept", "override")),
                None)


def replay(records: list[dict]) -> dict[str, SeriesHistory]:
    """series id → history.  The latest standing decision wins; ``revoke`` withdraws the
    revoker's own latest standing decision on that series; ``note`` changes nothing; a ``carry``
    stands on the data it was carried to as the accept or override it carries."""
    return apply({}, records)


def apply(histories: dict[str, SeriesHistory], records: list[dict]) -> dict[str, SeriesHistory]:
    """Replay further ``records`` onto ``histories`` (in place); returns it."""
    for record in records:
        sid = series_id(record["series"])
        history = histories.get(sid)
        if history is None:
            history = histories[sid] = SeriesHistory()
        history.records.append(record)
        action = record["action"]
        if action in STATUS_OF:
            history.standing.append(record)
        elif action == "revoke":
            mine = _own_index(history.standing, record["analyst"], record.get("os_user"))
            if mine is not None:
                del history.standing[mine]
    return histories


def made_by(decision: dict, analyst: str, os_user: str | None) -> bool:
    """Whether a decision is this person's: a /2 decision by its OS user, a /1 decision (which
    predates the rule) by its display name, as /1 ledgers always replayed."""
    if decision.get("schema") == SCHEMA and os_user is not None:
        return decision.get("os_user") == os_user
    return decision["analyst"] == analyst


def own_standing(history: SeriesHistory | None, analyst: str, os_user: str | None = None) -> dict | None:
    """The person's latest decision still standing on a series (what ``revoke`` would withdraw)."""
    if history is None:
        return None
    mine = _own_index(history.standing, analyst, os_user)
    return None if mine is None else history.standing[mine]


def _own_index(standing: list[dict], analyst: str, os_user: str | None) -> int | None:
    return next((i for i in range(len(standing) - 1, -1, -1) if made_by(standing[i], analyst, os_user)), None)
