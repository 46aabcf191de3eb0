"""Every kind of tampering, on a plain ledger and on a keyed one read with and without its key.

The ledger: six records — two single appends, one batch of three, one single append.  The forger
can write the file but has no key: where a digest must be recomputed, a plain ledger gets a right
SHA-256 (anyone can), a keyed ledger an HMAC under a guessed key.  ``state, line, words`` is what
the reader must say; in every case the head witnessed before the tampering (``verify --head``)
no longer checks out, so even the cases no file-local check can see are caught.
"""
from __future__ import annotations

import json

import pytest

from fitcore import ledger
from tests.fitcore.ledger_support import ANA, entry, lines

KEY, GUESS = b"sign-off key", b"a guess"


def build(path, key):
    for batch in ([entry("a")], [entry("b")], [entry("c"), entry("d"), entry("e")], [entry("f")]):
        ledger.append(path, batch, ANA, key=key)
    return ledger.Ledger(path, key).head


def forge(record: dict, keyed: bool) -> bytes:
    record["digest"] = ledger.digest_of(record, GUESS if keyed and record["digest_kind"] == "hmac-sha256" else None)
    return ledger.canonical(record) + b"\n"


def rechain(data: list[bytes], start: int, keyed: bool, edit=None) -> list[bytes]:
    """Rewrite records from index ``start`` on as plain SHA-256 records chained to each other."""
    prev = json.loads(data[start - 1])["digest"] if start else ledger.GENESIS
    out = data[:start]
    for line in data[start:]:
        record = json.loads(line)
        if edit and not out[start:]:
            edit(record)
        record.update(prev=prev, digest_kind="sha256")
        out.append(forge(record, keyed=False))
        prev = record["digest"]
    return out


def tamper(data: list[bytes], how: str, keyed: bool) -> list[bytes]:
    records = [json.loads(line) for line in data]
    if how == "edit":
        records[1]["model"] = "poly5"
        data[1] = ledger.canonical(records[1]) + b"\n"  # the old digest kept
    elif how == "delete":
        del data[1]
    elif how == "insert":
        forged = dict(records[1], series={"product": "z"}, seq=2, prev=records[0]["digest"])
        data.insert(1, forge(forged, keyed))
    elif how == "reorder":
        data[0], data[1] = data[1], data[0]
    elif how == "truncate":
        data[5] = data[5][:40]  # cut inside the last record, as a crash would
    elif how == "change seq":
        data[1] = forge(dict(records[1], seq=7), keyed)
    elif how == "re-chain from the edit":
        data = rechain(data, 1, keyed, edit=lambda r: r.update(model="poly5"))
    elif how == "re-chain all":
        data = rechain(data, 0, keyed, edit=lambda r: r.update(model="poly5"))
    elif how == "drop the end":
        del data[5]
    elif how == "drop a batch record":
        del data[3]
    return data


EDITED, CHAIN = "record was edited", "chain broken"
PLAIN_IN_FORCE = "plain digest while a ledger key is in force"
# how: (plain ledger, keyed ledger read with the key, keyed ledger read without it) → state, line, words
TABLE = {
    "edit": [("broken", 2, EDITED), ("broken", 2, EDITED), ("unverifiable", 1, "PRICEFOLD_LEDGER_KEY")],
    "delete": [("broken", 2, CHAIN), ("broken", 2, CHAIN), ("broken", 2, CHAIN)],
    "insert": [("broken", 3, CHAIN), ("broken", 2, EDITED), ("broken", 3, CHAIN)],
    "reorder": [("broken", 1, CHAIN), ("broken", 1, CHAIN), ("broken", 1, CHAIN)],
    "truncate": [("intact", None, None), ("intact", None, None), ("unverifiable", 1, "PRICEFOLD_LEDGER_KEY")],
    "change seq": [("broken", 2, "seq 7 follows seq 1"), ("broken", 2, EDITED), ("broken", 2, "seq 7 follows seq 1")],
    "re-chain from the edit": [("intact", None, None), ("broken", 2, PLAIN_IN_FORCE),
                               ("broken", 2, "plain digest after keyed records")],
    "re-chain all": [("intact", None, None), ("broken", 1, PLAIN_IN_FORCE), ("intact", None, None)],
    "drop the end": [("intact", None, None), ("intact", None, None), ("unverifiable", 1, "PRICEFOLD_LEDGER_KEY")],
    "drop a batch record": [("broken", 4, CHAIN), ("broken", 4, CHAIN), ("broken", 4, CHAIN)],
}
READERS = ["plain ledger", "keyed, read with the key", "keyed, read without the key"]
CASES = [(how, reader, *TABLE[how][i]) for how in TABLE for i, reader in enumerate(READERS)]


@pytest.mark.parametrize("how, reader, state, line, words", CASES)
def test_tampering(tmp_path, how, reader, state, line, words):
    path = tmp_path / "ledger.jsonl"
    keyed = reader != "plain ledger"
    head = build(path, KEY if keyed else None)
    path.write_bytes(b"".join(tamper(lines(path), how, keyed)))
    book = ledger.Ledger(path, KEY if reader == "keyed, read with the key" else None)
    assert book.state == state, (book.problem, book.problems)
    if line is not None:
        assert book.problem.line == line and words in book.problem.message, book.problem
    # The head witnessed before the tampering no longer checks out ('verify --head' exits 1).
    assert not (book.state == "intact" and book.holds(*head))
    # A broken or unverifiable ledger takes no appends, and the refusal names the line.
    if state != "intact":
        before = path.read_bytes()
        with pytest.raises(ledger.LedgerError, match=f"line {line}: "):
            book.append([entry("g", supersedes=None)], ANA)
        assert path.read_bytes() == before


@pytest.mark.parametrize("keyed", [False, True])
def test_the_head_witness_holds_while_the_ledger_only_grows(tmp_path, keyed):
    path = tmp_path / "ledger.jsonl"
    key = KEY if keyed else None
    head = build(path, key)
    ledger.append(path, [entry("g")], ANA, key=key)
    book = ledger.Ledger(path, key)
    assert book.state == "intact" and book.holds(*head) and book.head[0] == head[0] + 1
    assert not book.holds(head[0], "0" * 64) and not book.holds(head[0] + 5, head[1])


def test_verify_lists_every_problem_by_line(tmp_path):
    path = tmp_path / "ledger.jsonl"
    build(path, None)
    data = tamper(lines(path), "edit", False)
    data[4] = b"not json\n"
    path.write_bytes(b"".join(data))
    problems = ledger.verify(path)
    assert [p.line for p in problems if p.message.startswith(EDITED)] == [2]
    assert any(p.line == 5 and p.message == "not a valid JSON record" for p in problems)
    assert any(p.line == 6 and CHAIN in p.message for p in problems)


@pytest.mark.parametrize("change, words", [
    (lambda r: r.update(seq="2"), "expected 'seq' to be a whole number, found \"2\""),
    (lambda r: r.update(seq=True), "expected 'seq' to be a whole number, found true"),
    (lambda r: r.update(series=["a"]), "expected 'series' to be an object"),
    (lambda r: r.pop("note"), "a pricefold-ledger/2 record needs 'note', which is missing"),
    (lambda r: r.update(flags=[1]), "expected 'flags' to be a list of flag codes"),
    (lambda r: r.update(batch={"id": "x", "index": 1, "size": 2}), "expected 'batch' as {id, index, size}"),
    (lambda r: r.update(action="approve"), "expected an action of pricefold-ledger/2, found \"approve\""),
    (lambda r: r.update(schema="pricefold-ledger/9"), "expected schema 'pricefold-ledger/2' or"),
    (lambda r: r.update(carries="ab" * 32), "only a carry does"),
])
def test_a_record_of_the_wrong_shape_is_named_even_with_a_right_digest(tmp_path, change, words):
    path = tmp_path / "ledger.jsonl"
    build(path, None)
    data = lines(path)
    record = json.loads(data[1])
    change(record)
    data[1] = forge(record, keyed=False)
    path.write_bytes(b"".join(data))
    book = ledger.Ledger(path)
    assert book.state == "broken" and book.problem.line == 2 and words in book.problem.message, book.problem
    assert len(book.records) == 5  # the malformed record is neither shown nor replayed


def test_extra_fields_in_a_record_are_let_be(tmp_path):
    path = tmp_path / "ledger.jsonl"
    build(path, None)
    data = lines(path)
    record = json.loads(data[5])
    record["comment"] = "added by a later version"
    data[5] = forge(record, keyed=False)
    path.write_bytes(b"".join(data))
    book = ledger.Ledger(path)
    assert book.state == "intact" and book.records[-1]["comment"] == "added by a later version"
