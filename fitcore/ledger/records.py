"""What a ledger record is: the two schemas, the canonical bytes a digest covers, and the
shape every record read back must have.

``pricefold-ledger/1`` records (the first format) keep verifying and replaying as they always
did; every new record is ``pricefold-ledger/2``, which adds ``supersedes``, ``flags``, ``batch``,
``signed`` and ``carries`` and the action ``carry``.  A ledger may hold /1 records followed by /2
records; seq and the chain run on across the change.
"""
from __future__ import annotations

import hashlib
import hmac
import json
import re
from dataclasses import dataclass, field
from operator import itemgetter

from ..errors import PricefoldError
from .fastjson import canonical_bytes

SCHEMA_1 = "pricefold-ledger/1"
SCHEMA = "pricefold-ledger/2"
GENESIS = "0" * 64
ACTIONS_1 = ("accept", "override", "note", "hold", "revoke")
ACTIONS = (*ACTIONS_1, "carry")
DECISIONS = ("accept", "override", "carry")  # the actions that may carry a signed model
HEX64 = re.compile(r"[0-9a-f]{64}")
HEX32 = re.compile(r"[0-9a-f]{32}")
DAY = re.compile(r"[0-9]{4}-[0-9]{2}-[0-9]{2}")


class LedgerError(PricefoldError):
    """The ledger cannot be read or written as asked; the message says why, in one line."""


class LedgerConflict(LedgerError):
    """A decision was refused because the series moved on since the decider looked.

    ``latest`` is the series' latest record (what the decider has not seen)."""

    def __init__(self, message: str, latest: dict) -> None:
        super().__init__(message)
        self.latest = latest


@dataclass(frozen=True)
class Entry:
    """One decision to record (what the caller decides; the ledger adds seq, time, chain, batch).

    ``supersedes`` is the digest of the latest record on the series that the caller had seen
    (None: it had seen none); ``flags`` the codes of the series' flags as shown; ``signed`` the
    model as it stood (accept, override, carry); ``carries`` the digest a ``carry`` carries forward.
    ``last_date`` ("YYYY-MM-DD" or None) is the last date of the series' rows decided on, for the rule that
    refuses a decision on data older than the standing decision's (``rules.newer_standing``): recorded in a
    hold's record (a hold signs no model, and a signed model records its own), so a later decision can be
    judged against the hold's rows too.
    """

    series: dict
    action: str
    fingerprint: str
    results: str
    model: str | None = None
    proposed: str | None = None
    note: str = ""
    supersedes: str | None = None
    flags: tuple[str, ...] | list[str] = field(default_factory=tuple)
    signed: dict | None = None
    carries: str | None = None
    last_date: str | None = None


@dataclass(frozen=True)
class Identity:
    """Who records: a display name, the real OS user, the host."""

    analyst: str
    os_user: str
    host: str


@dataclass(frozen=True)
class Problem:
    line: int
    message: str

    def __str__(self) -> str:
        return f"line {self.line}: {self.message}"


def canonical(record: dict) -> bytes:
    """Sorted keys, no spaces, UTF-8; finite numbers only (JSON has no NaN): ``json.dumps`` with those
    settings, byte for byte (through orjson where that is the same: ``fastjson``)."""
    return canonical_bytes(record)


def digest_of(record: dict, key: bytes | None) -> str:
    body = canonical({k: v for k, v in record.items() if k != "digest"})
    return sign(body, key)


def sign(body: bytes, key: bytes | None) -> str:
    if key:
        keyed = _KEYED.get(key)
        if keyed is None:
            keyed = _KEYED[key] = hmac.new(key, digestmod=hashlib.sha256)
        keyed = keyed.copy()  # a copy of the keyed state: a third of the cost of a new HMAC a record
        keyed.update(body)
        return keyed.hexdigest()
    return hashlib.sha256(body).hexdigest()


_KEYED: dict[bytes, hmac.HMAC] = {}


def results_digest(header: dict) -> str:
    """Digest of a results file's settings and input: which fit a decision was made on."""
    return hashlib.sha256(canonical({"settings": header.get("settings"), "input": header.get("input")})).hexdigest()


def check_entry(entry: Entry) -> bytes | None:
    """What an entry must hold on its own, before the ledger's state is looked at.  Returns the signed
    model's canonical bytes (None without one), which ``new_record`` writes as they are."""
    if entry.action not in ACTIONS:
        raise LedgerError(f"expected an action among {', '.join(ACTIONS)}, got {entry.action!r}")
    if not isinstance(entry.series, dict) or not entry.series:
        raise LedgerError(f"expected the series key as a mapping of column to value, got {entry.series!r}")
    if not isinstance(entry.note, str):
        raise LedgerError(f"expected the note as text, got {type(entry.note).__name__}")
    if entry.action == "note" and not entry.note.strip():
        raise LedgerError("a note needs its text (a note record says something to the next reader)")
    if entry.action == "override" and not entry.note.strip():
        raise LedgerError("an override needs a note saying why the proposal was not taken")
    if entry.action == "override" and not entry.model:
        raise LedgerError("an override must name the candidate chosen instead")
    if entry.last_date is not None and not (isinstance(entry.last_date, str) and DAY.fullmatch(entry.last_date)):
        raise LedgerError(f"expected 'last_date' as YYYY-MM-DD or None, got {entry.last_date!r}")
    if entry.supersedes is not None and not (isinstance(entry.supersedes, str) and HEX64.fullmatch(entry.supersedes)):
        raise LedgerError(f"expected 'supersedes' as a record digest (64 hex digits) or None, got {entry.supersedes!r}")
    if isinstance(entry.flags, str) or not all(isinstance(code, str) for code in entry.flags):
        raise LedgerError(f"expected 'flags' as a list of flag codes, got {entry.flags!r}")
    if entry.signed is not None and not isinstance(entry.signed, dict):
        raise LedgerError(f"expected the signed model as an object or None, got {type(entry.signed).__name__}")
    signed = _plain_json(entry.signed, "the signed model") if entry.signed is not None else None
    if entry.signed is not None and entry.action not in DECISIONS:
        raise LedgerError(f"only {', '.join(DECISIONS)} record a signed model, not {entry.action}")
    if (entry.action == "carry") != (entry.carries is not None):
        raise LedgerError("a carry names the decision it carries forward ('carries'), and only a carry does")
    if entry.carries is not None and not (isinstance(entry.carries, str) and HEX64.fullmatch(entry.carries)):
        raise LedgerError(f"expected 'carries' as a record digest (64 hex digits), got {entry.carries!r}")
    return signed


# A stand-in for the signed model while the rest of a record is encoded: its bytes (from ``check_entry``)
# go in its place.  Only "supersedes" (a digest or null) follows "signed" among a record's keys, so the
# last occurrence of the stand-in after "signed": is the record's own, whatever the series key holds.
_STAND_IN = "\x00signed\x00"
_STAND_IN_MEMBER = b'"signed":' + json.dumps(_STAND_IN).encode("ascii")


def new_record(entry: Entry, who: Identity, seq: int, at: str, prev: str, batch: dict | None,
               key: bytes | None, signed: bytes | None = None) -> tuple[dict, bytes]:
    """The /2 record for ``entry`` and its line (canonical JSON and a newline).  ``signed``: the signed
    model's canonical bytes, when ``check_entry`` has made them already."""
    record = {"schema": SCHEMA, "seq": seq, "at": at, "analyst": who.analyst, "os_user": who.os_user,
              "host": who.host, "series": entry.series, "fingerprint": entry.fingerprint, "results": entry.results,
              "action": entry.action, "model": entry.model, "proposed": entry.proposed, "note": entry.note,
              "supersedes": entry.supersedes, "flags": list(entry.flags), "batch": batch, "signed": entry.signed,
              "carries": entry.carries, "prev": prev, "digest_kind": "hmac-sha256" if key else "sha256"}
    if entry.action == "hold" and entry.last_date is not None:  # an extra member, as readers have always let be
        record["last_date"] = entry.last_date
    if signed is not None and entry.signed is not None:
        record["signed"] = _STAND_IN
        body = _plain_json(record, "the record")
        at = body.rindex(_STAND_IN_MEMBER) + len(b'"signed":')
        body = body[:at] + signed + body[at + len(_STAND_IN_MEMBER) - len(b'"signed":'):]
        record["signed"] = entry.signed
    else:
        body = _plain_json(record, "the record")
    record["digest"] = sign(body, key)
    # The line is the canonical JSON of the record with its digest: "digest" sorts just before
    # "digest_kind", and no object before that key ("batch" is the only one) can hold it, so the
    # member goes in right there (one encoding of the record instead of two; the reader's fast path
    # takes it out again the same way).
    at = body.index(b',"digest_kind":')
    return record, body[:at] + b',"digest":"' + record["digest"].encode("ascii") + b'"' + body[at:] + b"\n"


def _plain_json(value, what: str) -> bytes:
    try:
        return canonical(value)
    except ValueError as exc:  # NaN or infinity
        raise LedgerError(f"expected finite numbers in {what} (JSON has no NaN or infinity): {exc}") from None
    except TypeError as exc:
        raise LedgerError(f"expected plain JSON values in {what}: {exc}") from None


_TEXT = (str,)
_TEXT_OR_NONE = (str, type(None))
_COMMON = {"seq": (int,), "at": _TEXT, "analyst": _TEXT, "os_user": _TEXT, "host": _TEXT, "series": (dict,),
           "fingerprint": _TEXT, "results": _TEXT, "action": _TEXT, "model": _TEXT_OR_NONE,
           "proposed": _TEXT_OR_NONE, "note": _TEXT, "prev": _TEXT, "digest_kind": _TEXT, "digest": _TEXT}
_SECOND = {"supersedes": _TEXT_OR_NONE, "flags": (list,), "batch": (dict, type(None)),
           "signed": (dict, type(None)), "carries": _TEXT_OR_NONE}
# Exact types (a bool is not a seq), as sets: one lookup a field for the 100,000 records of an open.
_FIELDS = {SCHEMA_1: tuple((name, frozenset(kinds)) for name, kinds in _COMMON.items()),
           SCHEMA: tuple((name, frozenset(kinds)) for name, kinds in {**_COMMON, **_SECOND}.items())}


def _allowed(fields: dict) -> frozenset:
    """Every tuple of field types a record may have (a few dozen): one set lookup checks them all."""
    combos = [()]
    for kinds in fields.values():
        combos = [combo + (kind,) for combo in combos for kind in kinds]
    return frozenset(combos)


_FAST = {schema: (frozenset(("schema", *fields)), itemgetter(*fields), _allowed(fields))
         for schema, fields in ((SCHEMA_1, _COMMON), (SCHEMA, {**_COMMON, **_SECOND}))}


def shape_problem(record: dict) -> str | None:
    """Why a parsed record cannot be a ledger record of its schema (None when it can)."""
    schema = record.get("schema")
    fast = _FAST.get(schema) if type(schema) is str else None
    if fast is not None and record.keys() == fast[0] and tuple(map(type, fast[1](record))) in fast[2]:
        if record["action"] not in (ACTIONS if schema == SCHEMA else ACTIONS_1):
            return f"expected an action of {schema}, found {json.dumps(record['action'])[:40]}"
        return _second_problem(record) if schema == SCHEMA else None
    return _slow_shape_problem(record, schema)


def _slow_shape_problem(record: dict, schema) -> str | None:
    """The same checks one field at a time, naming the first field that is wrong (extra fields in a
    record are let be, as they always were)."""
    fields = _FIELDS.get(schema) if type(schema) is str else None
    if fields is None:
        return f"expected schema {SCHEMA!r} or {SCHEMA_1!r}, found {json.dumps(schema)[:60]}"
    for name, kinds in fields:
        if type(record.get(name, _MISSING)) not in kinds:
            if name not in record:
                return f"a {schema} record needs '{name}', which is missing"
            return f"expected '{name}' to be {_kind_words(kinds)}, found {json.dumps(record[name])[:40]}"
    if record["action"] not in (ACTIONS if schema == SCHEMA else ACTIONS_1):
        return f"expected an action of {schema}, found {json.dumps(record['action'])[:40]}"
    if schema == SCHEMA:
        return _second_problem(record)
    return None


_MISSING = object()


def _second_problem(record: dict) -> str | None:
    if record["flags"] and not all(type(code) is str for code in record["flags"]):
        return "expected 'flags' to be a list of flag codes"
    batch = record["batch"]
    if batch is not None:
        ident, index, size = batch.get("id"), batch.get("index"), batch.get("size")
        if (len(batch) != 3 or type(ident) is not str or not HEX32.fullmatch(ident) or type(index) is not int
                or type(size) is not int or not 1 <= index <= size or size < 2):
            return f"expected 'batch' as {{id, index, size}} with 1 ≤ index ≤ size, found {json.dumps(batch)[:80]}"
    if record["signed"] is not None and record["action"] not in DECISIONS:
        return f"a {record['action']} carries no signed model"
    if (record["action"] == "carry") != (record["carries"] is not None):
        return "a carry names the decision it carries ('carries'), and only a carry does"
    return None


def _kind_words(kinds) -> str:
    words = {str: "text", int: "a whole number", dict: "an object", list: "a list", type(None): "null"}
    return " or ".join(words[k] for k in sorted(kinds, key=lambda k: k is type(None)))
