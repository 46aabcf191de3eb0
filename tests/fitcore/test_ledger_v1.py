"""Ledgers of the first format (``pricefold-ledger/1``) verify and replay exactly as before.

``ledger_v1/plain.jsonl`` and ``keyed.jsonl`` (key ``fixture-key``) were written by the /1 writer
(commit 99d7d6b) — twelve records by two analysts: accepts in one bulk append, an override,
notes, holds, withdrawals of one's own and of nothing, a control-character-free formula-like
name — and ``replayed.json`` is what that version's replay made of them.
"""
from __future__ import annotations

import json

import pytest

from fitcore import ledger
from fitcore.ledger.replay import replay
from tests.fitcore.ledger_support import ANA, V1, V1_KEY, entry, lines


def expected():
    return json.loads((V1 / "replayed.json").read_text())


def summary(histories):
    return {sid: {"status_f1": h.status("f1"), "status_f0": h.status("f0"),
                  "current_seq": h.current["seq"] if h.current else None,
                  "standing_seqs": [r["seq"] for r in h.standing]} for sid, h in histories.items()}


@pytest.mark.parametrize("name, key", [("plain", None), ("keyed", V1_KEY)])
def test_first_format_ledgers_verify_and_replay_as_before(name, key):
    book = ledger.Ledger(V1 / f"{name}.jsonl", key)
    assert book.state == "intact" and book.notes == [] and len(book.records) == 12
    assert {r["schema"] for r in book.records} == {"pricefold-ledger/1"}
    assert summary(book.histories) == expected()
    assert summary(replay(book.records)) == expected()
    assert book.head == (12, book.records[-1]["digest"])


def test_a_keyed_first_format_ledger_without_its_key_is_unverifiable():
    book = ledger.Ledger(V1 / "keyed.jsonl")
    assert book.state == "unverifiable" and book.problem.line == 1 and "PRICEFOLD_LEDGER_KEY" in book.problem.message
    assert summary(book.histories) == expected()  # readable, but nothing may be added
    with pytest.raises(ledger.LedgerError, match="nothing was recorded"):
        book.append([entry("new")], ANA)


@pytest.mark.parametrize("name, key", [("plain", None), ("keyed", V1_KEY)])
def test_second_format_records_continue_a_first_format_chain(tmp_path, name, key):
    path = tmp_path / "ledger.jsonl"
    path.write_bytes((V1 / f"{name}.jsonl").read_bytes())
    book = ledger.Ledger(path, key)
    apples = {"product": "apples 1 kg", "region": "North"}
    latest = book.histories[json.dumps(apples, separators=(",", ":"))].latest
    hold = ledger.Entry(series=apples, action="hold", fingerprint="f1", results="r" * 64, note="recount",
                        supersedes=latest["digest"])
    [written] = book.append([hold], ANA)
    assert written["seq"] == 13 and written["prev"] == book.records[11]["digest"]
    assert written["supersedes"] == latest["digest"]
    assert written["schema"] == "pricefold-ledger/2"
    again = ledger.Ledger(path, key)
    assert again.state == "intact" and again.head == (13, written["digest"])
    # The twelve old records replay as before; the hold now stands on apples.
    assert summary(replay(again.records[:12])) == expected()
    assert again.histories[json.dumps(apples, separators=(",", ":"))].status("f1") == "held"


def test_a_first_format_record_after_second_format_records_is_refused(tmp_path):
    path = tmp_path / "ledger.jsonl"
    ledger.append(path, [entry("a")], ANA)
    old = json.loads(lines(V1 / "plain.jsonl")[0])
    old.update(seq=2, prev=ledger.Ledger(path).head[1])
    old["digest"] = ledger.digest_of(old, None)
    path.write_bytes(path.read_bytes() + ledger.canonical(old) + b"\n")
    book = ledger.Ledger(path)
    assert book.state == "broken" and book.problem.line == 2
    assert "pricefold-ledger/1 record after pricefold-ledger/2 records" in book.problem.message
