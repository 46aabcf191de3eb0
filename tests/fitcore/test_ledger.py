"""The sign-off ledger: chaining, tamper detection, replay, concurrency and crashes."""
from __future__ import annotations

import json
import multiprocessing
import os
import random
import signal
import time

import pytest

from fitcore import ledger
from fitcore.ledger.replay import replay, series_id

ANA = ledger.Identity("ana", "ana", "server-1")
BO = ledger.Identity("bo", "bo", "server-1")


def entry(product, action="accept", model="poly1", note="", fingerprint="f1"):
    return ledger.Entry(series={"product": product}, action=action, fingerprint=fingerprint, results="r1",
                        model=model, proposed="poly1", note=note)


def lines(path):
    return path.read_bytes().splitlines(keepends=True)


def test_records_chain_and_verify(tmp_path):
    path = tmp_path / "ledger.jsonl"
    first = ledger.append(path, [entry("a"), entry("b")], ANA)
    second = ledger.append(path, [entry("c", "hold")], BO)
    assert [r["seq"] for r in first + second] == [1, 2, 3]
    assert first[0]["prev"] == ledger.GENESIS and first[1]["prev"] == first[0]["digest"]
    assert second[0]["prev"] == first[1]["digest"]
    assert second[0]["analyst"] == "bo" and second[0]["at"].endswith("Z")
    assert ledger.verify(path) == []


def test_override_needs_a_note(tmp_path):
    with pytest.raises(ledger.LedgerError, match="an override needs a note"):
        ledger.append(tmp_path / "l.jsonl", [entry("a", "override", model="poly2")], ANA)
    assert not (tmp_path / "l.jsonl").exists() or (tmp_path / "l.jsonl").read_bytes() == b""


def tamper(path, how):
    data = lines(path)
    if how == "edit":
        record = json.loads(data[1])
        record["model"] = "poly5"
        data[1] = (json.dumps(record) + "\n").encode()
    elif how == "delete":
        del data[1]
    elif how == "swap":
        data[1], data[2] = data[2], data[1]
    path.write_bytes(b"".join(data))


@pytest.mark.parametrize("how, line, words", [
    ("edit", 2, "record was edited"),
    ("delete", 2, "chain broken"),
    ("swap", 2, "chain broken"),
])
def test_tampering_is_detected_with_its_line(tmp_path, how, line, words):
    path = tmp_path / "ledger.jsonl"
    ledger.append(path, [entry(p) for p in "abcd"], ANA)
    tamper(path, how)
    problems = ledger.verify(path)
    assert problems and problems[0].line == line and words in problems[0].message


def test_a_forged_plain_record_is_caught_when_a_key_is_in_force(tmp_path):
    path = tmp_path / "ledger.jsonl"
    key = b"sign-off key"
    ledger.append(path, [entry("a"), entry("b")], ANA, key=key)
    assert ledger.verify(path, key) == []
    forged = ledger.append(path, [entry("c", "override", model="poly3", note="mine")], BO)  # no key
    assert forged[0]["digest_kind"] == "sha256"
    problems = ledger.verify(path, key)
    assert [p.line for p in problems] == [3] and "plain digest while a ledger key is in force" in problems[0].message
    # Recomputing a keyed-looking record without the key does not verify either.
    record = json.loads(lines(path)[2])
    record["digest_kind"] = "hmac-sha256"
    record["digest"] = ledger.digest_of(record, b"guess")
    data = lines(path)[:2] + [(json.dumps(record) + "\n").encode()]
    path.write_bytes(b"".join(data))
    problems = ledger.verify(path, key)
    assert [p.line for p in problems] == [3] and "edited" in problems[0].message


def test_torn_tail_is_reported_then_moved_aside_by_the_next_append(tmp_path):
    path = tmp_path / "ledger.jsonl"
    ledger.append(path, [entry("a"), entry("b")], ANA)
    whole = path.read_bytes()
    torn = b'{"schema": "pricefold-ledger/1", "seq": 3, "ana'
    path.write_bytes(whole + torn)
    problems = ledger.verify(path)
    assert [p.line for p in problems] == [3] and "torn last line" in problems[0].message
    written = ledger.append(path, [entry("c")], ANA)
    assert written[0]["seq"] == 3 and ledger.verify(path) == []
    sides = list(tmp_path.glob("ledger.jsonl.torn-*"))
    assert len(sides) == 1 and sides[0].read_bytes() == torn
    assert path.read_bytes().startswith(whole)


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


def _append_many(path, name, count):
    who = ledger.Identity(name, name, "h")
    for i in range(count):
        ledger.append(path, [entry(f"{name}-{i}")], who)


def run_together(target, arguments):
    """Start one forked process per argument tuple at once; all must finish cleanly."""
    context = multiprocessing.get_context("fork")
    workers = [context.Process(target=target, args=args) for args in arguments]
    for w in workers:
        w.start()
    for w in workers:
        w.join(60)
        assert w.exitcode == 0


def test_concurrent_writers_lose_nothing(tmp_path):
    path = tmp_path / "ledger.jsonl"
    run_together(_append_many, [(path, f"w{k}", 150) for k in range(4)])
    records, problems = ledger.read(path)
    assert problems == [] and ledger.verify(path) == []
    assert [r["seq"] for r in records] == list(range(1, 601))
    products = [r["series"]["product"] for r in records]
    assert len(set(products)) == 600


def _accept_all(path, results, name):
    def decide(records):
        decided = replay(records)
        return [entry(p) for p in results if series_id({"product": p}) not in decided]
    ledger.append(path, decide, ledger.Identity(name, name, "h"))


def test_concurrent_bulk_accepts_record_each_series_once(tmp_path):
    path = tmp_path / "ledger.jsonl"
    products = [f"p{i}" for i in range(300)]
    run_together(_accept_all, [(path, products, f"a{k}") for k in range(4)])
    records, _ = ledger.read(path)
    assert sorted(r["series"]["product"] for r in records) == sorted(products)
    assert ledger.verify(path) == []


def _write_forever(path):
    who = ledger.Identity("crash", "crash", "h")
    i = 0
    while True:
        ledger.append(path, [entry(f"x{i}-{j}", note="n" * 100) for j in range(200)], who)
        i += 1


def test_killed_writers_never_damage_what_was_recorded(tmp_path):
    path = tmp_path / "ledger.jsonl"
    context = multiprocessing.get_context("fork")
    rng = random.Random(0)
    before: list[bytes] = []
    torn_seen, last, tails = 0, None, []  # a torn tail can outlive the next kill (file untouched): count it once
    for _ in range(100):
        child = context.Process(target=_write_forever, args=(path,))
        child.start()
        time.sleep(rng.uniform(0.0, 0.015))
        os.kill(child.pid, signal.SIGKILL)
        child.join()
        problems = ledger.verify(path) if path.exists() else []
        assert all("torn last line" in p.message for p in problems), problems
        state = path.read_bytes() if path.exists() else b""
        torn_seen += bool(problems) and state != last
        if problems:
            tails.append(state.rsplit(b"\n", 1)[-1])
        last = state
        now = [line for line in lines(path) if line.endswith(b"\n")] if path.exists() else []
        assert now[:len(before)] == before  # every whole record written before the kill is intact
        before = now
    # The next append sets any torn tail aside and chains on.
    ledger.append(path, [entry("after")], ANA)
    assert ledger.verify(path) == []
    # Each torn tail is set aside whole (a writer killed between saving it and cutting it from the
    # ledger leaves a second copy of the same tail, never a loss).
    aside = [side.read_bytes() for side in tmp_path.glob("ledger.jsonl.torn-*")]
    assert len(aside) >= torn_seen and all(any(tail.startswith(part) for tail in tails) for part in aside)
    assert {part for part in aside if part} >= {tail for tail in tails[-1:]}
    print(f"torn tails left by 100 kills: {torn_seen}; records: {len(before)}")


def test_a_failed_write_is_one_line_and_leaves_earlier_records_intact(tmp_path, monkeypatch):
    import errno
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
