"""The chain: each record's digest and its link to the record before, checked one record at a time.

Every record carries ``prev`` (the previous record's digest) and ``digest``: SHA-256 over the
record's canonical JSON without ``digest`` — or, when a key is given (``PRICEFOLD_LEDGER_KEY`` at
the command line), HMAC-SHA-256 with that key, so someone who can edit the file but lacks the key
cannot forge a valid chain.  Any edit, deletion, insertion or reordering breaks the chain at a
line.  Records of one multi-record append carry ``batch`` markers; ``ChainState.batch`` says
whether the batch being read is still open (a reader counts a batch only once it is whole).

Dropping whole records (or whole batches) from the end leaves a valid, shorter chain: only an
outside witness of the head (``SEQ:DIGEST``) catches that.
"""
from __future__ import annotations

import json
from dataclasses import dataclass, replace
from typing import NamedTuple

from .records import GENESIS, HEX64, SCHEMA, SCHEMA_1, digest_of, shape_problem, sign

KEYED, PLAIN = "hmac-sha256", "sha256"
EDITED = "record was edited: its digest does not match its content"
# A keyed digest that does not match may as well mean the key is not the one it was signed with.
KEYED_EDITED = "record was edited, or signed with another key than PRICEFOLD_LEDGER_KEY: its digest does not match"


@dataclass
class ChainState:
    """Where the chain stands after the records checked so far."""

    seq: int = 0
    prev: str = GENESIS
    second: bool = False  # a pricefold-ledger/2 record was seen
    keyed: bool = False  # a keyed record was seen
    batch: tuple[str, int, int] | None = None  # (id, index of the last record read, size) of an open batch

    def copy(self) -> ChainState:
        return replace(self)


class Verdict(NamedTuple):
    problems: list[str]
    unverifiable: bool  # a keyed record read without the key: its digest could not be checked
    well_formed: bool  # the record has its schema's fields (so it can be shown and replayed)


def check(state: ChainState, record: dict, raw: bytes, key: bytes | None) -> Verdict:
    """What is wrong with ``record`` (its line's bytes ``raw``) after those before it.  Advances ``state``."""
    problems = []
    shape = shape_problem(record)
    if shape:
        problems.append(shape)
    unverifiable = False
    kind = record.get("digest_kind")
    if kind not in (KEYED, PLAIN):
        problems.append(f"expected digest_kind {PLAIN!r} or {KEYED!r}, found {kind!r}")
    elif kind == KEYED:
        state.keyed = True
        if key is None:
            unverifiable = True
        elif not shape and not digest_matches(record, raw, key):
            problems.append(KEYED_EDITED)
    elif key is not None:
        problems.append("plain digest while a ledger key is in force (added without the key)")
    elif state.keyed:
        problems.append("plain digest after keyed records (added or re-chained without the key)")
    elif not shape and not digest_matches(record, raw, None):
        problems.append(EDITED)
    schema = record.get("schema")
    if schema == SCHEMA_1 and state.second:
        problems.append(f"a {SCHEMA_1} record after {SCHEMA} records (written by an older pricefold?)")
    state.second = state.second or schema == SCHEMA
    if record.get("prev") != state.prev:
        problems.append("chain broken: 'prev' is not the digest of the record before "
                        "(a record was deleted, inserted or moved)")
    seq = record.get("seq")
    if seq != state.seq + 1:
        problems.append(f"seq {json.dumps(seq)[:20]} follows seq {state.seq}")
    if isinstance(seq, int) and not isinstance(seq, bool):
        state.seq = seq
    digest = record.get("digest")
    state.prev = digest if isinstance(digest, str) else state.prev
    problems += _batch_problems(state, record.get("batch") if not shape and schema == SCHEMA else None)
    return Verdict(problems, unverifiable, not shape)


def _batch_problems(state: ChainState, batch: dict | None) -> list[str]:
    """Batch markers in order: 1..N of one id, nothing else in between."""
    problems = []
    if state.batch is not None and (batch is None or batch["id"] != state.batch[0]):
        ident, index, size = state.batch
        problems.append(f"an incomplete batch ({index} of {size} records, id {ident[:8]}…) "
                        "is followed by other records")
        state.batch = None
    if batch is None:
        return problems
    expected = 1 if state.batch is None else state.batch[1] + 1
    if batch["index"] != expected or (state.batch is not None and batch["size"] != state.batch[2]):
        problems.append(f"batch record {batch['index']} of {batch['size']} where record {expected} was due "
                        "(batch records were deleted, inserted or moved)")
        state.batch = None
        return problems
    state.batch = None if batch["index"] == batch["size"] else (batch["id"], batch["index"], batch["size"])
    return problems


def digest_matches(record: dict, raw: bytes, key: bytes | None) -> bool:
    """Whether ``record``'s digest is right for its content.

    Fast path: a line written by pricefold is the canonical JSON of its record, so the digested
    bytes are the line without its ``,"digest":"…"`` member (never the first or last key) — no
    need to serialise the record again.  Any other line falls back to the canonical form of what
    was parsed from that line alone, so a record reformatted but unchanged still verifies, as it
    always did.
    """
    digest = record.get("digest")
    if not isinstance(digest, str):
        return False
    if HEX64.fullmatch(digest):
        member = b',"digest":"' + digest.encode("ascii") + b'"'
        at = raw.find(member)
        if at > 0 and sign(raw[:at] + raw[at + len(member):], key) == digest:
            return True
    try:  # the line parsed on its own must be the record (a reader may parse many lines at once)
        return json.loads(raw) == record and digest_of(record, key) == digest
    except (TypeError, ValueError):
        return False


def check_plain(state: ChainState, record: dict, raw: bytes, key: bytes | None) -> bool:
    """``check`` for the usual record — a well-formed /2 record as pricefold writes it, its digest of the
    kind in force, the next in the chain and in its batch — in one pass: True when it is one (``state``
    advanced exactly as ``check`` advances it, nothing to say), False when ``check`` must judge it
    (``state`` untouched).  A third of opening a 100,000-record ledger was ``check``'s calls and lookups."""
    if record.get("schema") != SCHEMA or shape_problem(record) is not None:
        return False
    kind, digest = record["digest_kind"], record["digest"]
    if kind != (KEYED if key is not None else PLAIN) or (key is None and state.keyed):
        return False
    seq = record["seq"]
    if record["prev"] != state.prev or seq != state.seq + 1 or not HEX64.fullmatch(digest):
        return False
    batch, open_batch = record["batch"], state.batch
    if open_batch is not None:
        if batch is None or batch["id"] != open_batch[0] or batch["index"] != open_batch[1] + 1 \
                or batch["size"] != open_batch[2]:
            return False
    elif batch is not None and batch["index"] != 1:
        return False
    member = b',"digest":"' + digest.encode("ascii") + b'"'
    at = raw.find(member)
    if at <= 0 or sign(raw[:at] + raw[at + len(member):], key) != digest:
        return False  # (a line not as pricefold writes it may still verify: ``check`` decides)
    state.seq, state.prev, state.second = seq, digest, True
    state.keyed = state.keyed or kind == KEYED
    state.batch = None if batch is None or batch["index"] == batch["size"] else \
        (batch["id"], batch["index"], batch["size"])
    return True
