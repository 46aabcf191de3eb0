"""``chain.check_plain`` (the one-pass check of the usual record) against ``chain.check`` (every rule).

The reference is ``check``: wherever ``check_plain`` takes a record it must be one ``check`` finds nothing
wrong with, leaving the chain's state exactly as ``check`` leaves it; and every record of a ledger in the
usual shape (batches, single decisions, plain and keyed) must be taken, or there is no speed to gain.
Each record is also tried edited one field at a time, re-signed or not.
"""
from __future__ import annotations

import json
import random

import pytest

from fitcore import ledger
from fitcore.ledger.chain import ChainState, check, check_plain
from fitcore.ledger.records import digest_of
from tests.fitcore.ledger_support import ANA, BO, entry


def _ledger(path, key):
    book = ledger.Ledger(path, key)
    book.append([entry(f"p{i}", signed={"candidate": "poly1", "coef": [1.5, -0.25]}) for i in range(5)], ANA)
    book.append([entry("p0", action="hold", supersedes=book.histories['{"product":"p0"}'].latest["digest"])], BO)
    book.append([entry("q", action="note", note="asked")], BO)
    book.append([entry(f"r{i}", fingerprint="f2") for i in range(3)], ANA)
    return [(json.loads(line), line) for line in path.read_bytes().splitlines()]


def _both(state: ChainState, record: dict, raw: bytes, key):
    plain, full = state.copy(), state.copy()
    taken = check_plain(plain, record, raw, key)
    verdict = check(full, record, raw, key)
    return taken, plain, verdict, full


@pytest.mark.parametrize("key", [None, b"k"])
def test_every_usual_record_is_taken_in_one_pass_as_check_takes_it(tmp_path, key):
    state = ChainState()
    for record, raw in _ledger(tmp_path / "l.jsonl", key):
        taken, plain, verdict, full = _both(state, record, raw, key)
        assert taken and verdict.problems == [] and not verdict.unverifiable
        assert plain == full
        state = full


EDITS = [("seq", 99), ("prev", "0" * 64), ("digest", "f" * 64), ("digest_kind", "sha256"),
         ("digest_kind", "hmac-sha256"), ("action", "approve"), ("schema", "pricefold-ledger/1"), ("flags", [1]),
         ("batch", None), ("batch", {"id": "a" * 32, "index": 2, "size": 5}), ("note", "edited"),
         ("signed", {"candidate": "poly2"}), ("carries", "a" * 64), ("series", "p0"), ("at", 5)]


@pytest.mark.parametrize("key", [None, b"k"])
@pytest.mark.parametrize("resign", [False, True])
def test_an_edited_record_is_taken_only_where_check_finds_nothing(tmp_path, key, resign):
    rows = _ledger(tmp_path / "l.jsonl", key)
    state, rng = ChainState(), random.Random(7)
    for record, raw in rows:
        for name, value in EDITS + [(None, None)]:
            edited = dict(record)
            if name is not None:
                edited[name] = value
            if resign:
                edited["digest"] = digest_of(edited, key if rng.random() < 0.8 else None)
            line = json.dumps(edited, sort_keys=True, separators=(",", ":"), ensure_ascii=False).encode()
            taken, plain, verdict, full = _both(state, edited, line, key)
            if taken:
                assert verdict.problems == [] and not verdict.unverifiable and plain == full, (name, value)
            else:
                assert plain == state  # untouched: check judges it
        state = _both(state, record, raw, key)[3]


def test_a_keyed_record_read_without_the_key_is_left_to_check(tmp_path):
    rows = _ledger(tmp_path / "l.jsonl", b"k")
    record, raw = rows[0]
    taken, _, verdict, _ = _both(ChainState(), record, raw, None)
    assert not taken and verdict.unverifiable
