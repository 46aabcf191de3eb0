"""The sign-off ledger: chaining, replay, concurrency and crashes (batches land whole or not at all)."""
from __future__ import annotations

import errno
import os
import random

import pytest

import fitcore.review.flags  # noqa: F401 - the append rules' flag table, loaded before forking writers
from fitcore import ledger
from fitcore.ledger.replay import replay, series_id
from tests.fitcore.ledger_support import (
                                          ANA,
                                          BO,
                                          entry,
                                          kill_at_random,
                                          lines,
                                          run_together,
                                          slow_disk,
                                          whole_batches,
)


def test_records_chain_and_verify(tmp_path):
    path = tmp_path / "ledger.jsonl"
    first = ledger.append(path, [entry("a"), entry("b")], ANA)
    second = ledger.append(path, [entry("c", "hold")], BO)
    assert [r["seq"] for r in first + second] == [1, 2, 3]
    assert first[0]["prev"] == ledger.GENESIS and first[1]["prev"] == first[0]["digest"]
    assert second[0]["prev"] == first[1]["digest"]
    assert second[0]["analyst"] == "bo" and second[0]["at"].endswith("Z")
    assert {r["schema"] for r in first + second} == {"pricefold-ledger/2"}
    # Two records in one append carry one batch marker; a single record none.
    assert [r["batch"]["index"] for r in first] == [1, 2] and {r["batch"]["size"] for r in first} == {2}
    assert first[0]["batch"]["id"] == first[1]["batch"]["id"] and len(first[0]["batch"]["id"]) == 32
    assert second[0]["batch"] is None
    assert second[0]["supersedes"] is None and second[0]["flags"] == [] and second[0]["signed"] is None
    assert ledger.verify(path) == []
    book = ledger.Ledger(path)
    assert book.state == "intact" and book.head == (3, second[0]["digest"]) and len(book.records) == 3
    # The line is the record's canonical JSON: the digest covers it without its own member.
    assert lines(path)[2] == ledger.canonical(second[0]) + b"\n"
    assert second[0]["digest"] == ledger.digest_of(second[0], None)


def test_override_needs_a_note(tmp_path):
    with pytest.raises(ledger.LedgerError, match="an override needs a note"):
        ledger.append(tmp_path / "l.jsonl", [entry("a", "override", model="poly2")], ANA)
    assert not (tmp_path / "l.jsonl").exists() or (tmp_path / "l.jsonl").read_bytes() == b""


@pytest.mark.parametrize("text", ["", "   \n"])
def test_a_note_needs_its_text(tmp_path, text):
    path = tmp_path / "l.jsonl"
    ledger.append(path, [entry("a")], ANA)
    before = path.read_bytes()
    with pytest.raises(ledger.LedgerError, match="a note needs its text"):
        ledger.append(path, [entry("a", "note", note=text)], ANA)
    assert path.read_bytes() == before


def test_torn_tail_is_noted_then_moved_aside_by_the_next_append(tmp_path):
    path = tmp_path / "ledger.jsonl"
    ledger.append(path, [entry("a"), entry("b")], ANA)
    whole = path.read_bytes()
    torn = whole.splitlines(keepends=True)[-1][:47]  # a record's line cut short, as a killed write leaves it
    path.write_bytes(whole + torn)
    book = ledger.Ledger(path)
    assert book.state == "intact" and ledger.verify(path) == []  # an interrupted write is not a broken chain
    assert [n.line for n in book.notes] == [3] and "torn last line (47 bytes" in book.notes[0].message
    written = ledger.append(path, [entry("c")], ANA)
    assert written[0]["seq"] == 3 and ledger.verify(path) == [] and ledger.Ledger(path).notes == []
    sides = list(tmp_path.glob("ledger.jsonl.torn-*"))
    assert len(sides) == 1 and sides[0].read_bytes() == torn
    assert path.read_bytes().startswith(whole)


@pytest.mark.parametrize("stranger", [b'{"schema":"pricefold-results/1","series":[]}', b"my ledger"])
def test_a_file_that_is_not_a_ledger_is_refused_not_set_aside(tmp_path, stranger):
    # A results file given as the ledger (one JSON line with no line end) once looked like a torn
    # last line: the append moved it aside and wrote a ledger in its place.
    path = tmp_path / "cycle.json"
    path.write_bytes(stranger)
    book = ledger.Ledger(path)
    assert book.state == "broken" and "not the start of a ledger record" in book.problems[0].message
    with pytest.raises(ledger.LedgerError, match="nothing was recorded"):
        ledger.append(path, [entry("a")], ANA)
    assert path.read_bytes() == stranger and sorted(tmp_path.iterdir()) == [path]


def test_replay_by_two_analysts():
    def rec(analyst, action, product="a", model="poly1", fingerprint="f1"):
        return {"series": {"product": product}, "analyst": analyst, "action": action, "model": model,
                "fingerprint": fingerprint}
    records = [rec("ana", "accept"), rec("bo", "override", model="poly2"), rec("ana", "note"),
               rec("bo", "revoke"), rec("bo", "hold", product="b"), rec("ana", "revoke", product="b")]
    history = replay(records)
    a, b = history[series_id({"product": "a"})], history[series_id({"product": "b"})]
    assert a.status("f1") == "accepted" and a.current["analyst"] == "ana"  # bo withdrew only his own
    assert b.status("f1") == "held"  # ana had nothing to withdraw on b
    assert replay(records[:2])[series_id({"product": "a"})].status("f1") == "overridden"
    assert a.status("f2") == "stale"  # the data behind the decision changed
    assert replay(records[:1] + [rec("ana", "revoke")])[series_id({"product": "a"})].status() == "pending"


def test_replay_of_second_schema_records_carry_and_revoke_by_os_user():
    def rec(analyst, os_user, action, fingerprint="f1"):
        return {"schema": "pricefold-ledger/2", "series": {"product": "a"}, "analyst": analyst, "os_user": os_user,
                "action": action, "model": "poly1", "fingerprint": fingerprint}
    accept = rec("Ana", "ana", "accept")
    carried = replay([accept, rec("Bo", "bo", "carry", fingerprint="f2")])[series_id({"product": "a"})]
    assert carried.status("f2") == "accepted" and carried.status("f1") == "stale"
    # A display name is not an identity: "Ana" on another account withdraws nothing of ana's ...
    impostor = replay([accept, rec("Ana", "mallory", "revoke")])[series_id({"product": "a"})]
    assert impostor.status("f1") == "accepted"
    # ... and ana under another display name withdraws her own decision.
    renamed = replay([accept, rec("Ana S.", "ana", "revoke")])[series_id({"product": "a"})]
    assert renamed.status("f1") == "pending" and renamed.latest["action"] == "revoke"


def _append_many(path, name, count):
    who = ledger.Identity(name, name, "h")
    for i in range(count):
        ledger.append(path, [entry(f"{name}-{i}")], who)


def test_concurrent_writers_lose_nothing(tmp_path):
    path = tmp_path / "ledger.jsonl"
    assert run_together(_append_many, [(path, f"w{k}", 150) for k in range(4)]) == [0] * 4
    book = ledger.Ledger(path)
    assert book.state == "intact" and book.notes == []
    assert [r["seq"] for r in book.records] == list(range(1, 601))
    assert len({r["series"]["product"] for r in book.records}) == 600


def _accept_all(path, results, name):
    def decide(records):
        decided = replay(records)
        return [entry(p) for p in results if series_id({"product": p}) not in decided]
    ledger.append(path, decide, ledger.Identity(name, name, "h"))


def test_concurrent_bulk_accepts_record_each_series_once(tmp_path):
    path = tmp_path / "ledger.jsonl"
    products = [f"p{i}" for i in range(300)]
    assert run_together(_accept_all, [(path, products, f"a{k}") for k in range(4)]) == [0] * 4
    book = ledger.Ledger(path)
    assert sorted(r["series"]["product"] for r in book.records) == sorted(products)
    assert book.state == "intact" and len({r["batch"]["id"] for r in book.records}) == 1  # one bulk won


def _write_forever(path, ready):
    slow_disk()
    who = ledger.Identity("crash", "crash", "h")
    book = ledger.Ledger(path)  # opened once, as a long-lived writer would
    ready.set()
    i = 0
    while True:
        book.append([entry(f"{os.getpid()}-{i}-{j}", note="n" * 100) for j in range(50)], who)
        i += 1


def test_killed_writers_never_leave_a_partial_batch_counted(tmp_path):
    path = tmp_path / "ledger.jsonl"
    rng = random.Random(0)
    counted = b""
    interrupted, tails = 0, []
    for _ in range(100):
        kill_at_random(_write_forever, (path,), rng, 0.03)
        book = ledger.Ledger(path)
        assert book.state == "intact", book.problem
        assert whole_batches(book) and len(book.records) % 50 == 0
        state = path.read_bytes() if path.exists() else b""
        assert state[:len(counted)] == counted  # every record counted before this kill is still there
        counted = state[:book.tail_start]
        if book.notes:
            interrupted += 1
            tails.append(state[book.tail_start:])
    book = ledger.Ledger(path)
    ledger.append(path, [entry("after")], ANA)  # the next append sets an interrupted tail aside, whole
    after = ledger.Ledger(path)
    assert after.state == "intact" and after.notes == [] and whole_batches(after)
    assert len(after.records) == len(book.records) + 1
    aside = [side.read_bytes() for side in tmp_path.glob("ledger.jsonl.torn-*")]
    assert all(part in tails for part in aside) and (not book.notes or tails[-1] in aside)
    assert interrupted > 0  # the test provoked interrupted appends (partial batches or torn lines)
    print(f"100 kills: {interrupted} left an interrupted batch; {len(book.records)} records counted; "
          f"{len(aside)} tails set aside")


def test_a_failed_write_is_one_line_and_leaves_earlier_records_intact(tmp_path, monkeypatch):
    path = tmp_path / "ledger.jsonl"
    ledger.append(path, [entry("a"), entry("b")], ANA)
    before = path.read_bytes()
    real_write = os.write

    def full_disk(fd, data):
        real_write(fd, bytes(data)[:10])  # part of the line lands, then the disk is full
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(os, "write", full_disk)
    with pytest.raises(ledger.LedgerError, match="the decision was not recorded \\(No space left on device\\); "
                                                 "earlier records are intact") as info:
        ledger.append(path, [entry("c")], ANA)
    assert "\n" not in str(info.value)
    monkeypatch.setattr(os, "write", real_write)
    assert path.read_bytes() == before and ledger.verify(path) == []


def test_an_unwritable_ledger_is_one_line(tmp_path):
    folder = tmp_path / "no-such-folder" / "ledger.jsonl"
    with pytest.raises(ledger.LedgerError, match="cannot open the ledger for writing"):
        ledger.append(folder, [entry("a")], ANA)


def test_a_new_ledger_respects_the_umask(tmp_path):
    old = os.umask(0o002)
    try:
        ledger.append(tmp_path / "team.jsonl", [entry("a")], ANA)
    finally:
        os.umask(old)
    assert (tmp_path / "team.jsonl").stat().st_mode & 0o777 == 0o664  # shared with the group, as asked
