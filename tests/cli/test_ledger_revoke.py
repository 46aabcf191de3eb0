"""``pricefold ledger revoke``: one's own standing decisions withdrawn by record or by batch, with a note; the
ledger's rule (own, standing, latest) judged under its lock; all or nothing for named records; nothing written
on a refusal."""
from __future__ import annotations

import pytest

from fitcore import ledger
from fitcore.ledger.replay import series_id
from pricefold import cli, revoke_cli

FP, RESULTS = "a" * 64, "b" * 64
ANA = ledger.Identity("ana", "ana", "host")
BO = ledger.Identity("bo", "bo", "host")


def key(i: int) -> dict:
    return {"product": f"item {i}", "region": "North"}


def accept(i: int, model: str = "poly1", latest: str | None = None) -> ledger.Entry:
    return ledger.Entry(series=key(i), action="accept", fingerprint=FP, results=RESULTS, model=model,
                        proposed=model, supersedes=latest)


@pytest.fixture
def book(tmp_path, monkeypatch):
    """A ledger: ana's batch of 4 accepts (#1–#4), then bo overrides item 2 (#5) and ana accepts item 9 (#6)."""
    path = tmp_path / "decisions.jsonl"
    ledger.Ledger(path).append([accept(i) for i in range(1, 5)], ANA)
    latest = ledger.Ledger(path).histories[series_id(key(2))].latest["digest"]
    ledger.Ledger(path).append([ledger.Entry(series=key(2), action="override", fingerprint=FP, results=RESULTS,
                                             model="poly2", note="curve", supersedes=latest)], BO)
    ledger.Ledger(path).append([accept(9)], ANA)
    monkeypatch.setattr(revoke_cli, "identity", lambda analyst: ANA)
    return path


def standing(path, i: int) -> dict | None:
    history = ledger.Ledger(path).histories.get(series_id(key(i)))
    return history.current if history else None


def revoke(path, *args) -> int:
    return cli.main(["ledger", "revoke", str(path), *args])


def test_a_named_decision_is_withdrawn_with_its_note_and_the_chain_holds(book, capsys):
    assert revoke(book, "--record", "6", "--note", "wrong results file") == 0
    assert standing(book, 9) is None  # back to pending
    last = ledger.Ledger(book).records[-1]
    assert (last["action"], last["note"], last["os_user"]) == ("revoke", "wrong results file", "ana")
    assert last["supersedes"] == ledger.Ledger(book).records[5]["digest"]
    assert ledger.Ledger(book).state == "intact"
    assert "withdrew 1 decision → " in capsys.readouterr().err


def test_what_stood_before_stands_again(book, monkeypatch):
    latest = ledger.Ledger(book).histories[series_id(key(9))].latest["digest"]
    ledger.Ledger(book).append([ledger.Entry(series=key(9), action="override", fingerprint=FP, results=RESULTS,
                                             model="poly3", note="bend", supersedes=latest)], ANA)  # #7
    assert revoke(book, "--record", "7", "--note", "too bendy") == 0
    assert standing(book, 9)["seq"] == 6  # ana's accept again


@pytest.mark.parametrize("records, why", [
    (["1", "2"], "#2 (item 2 · North): no longer stands (bo overrode the proposal with poly2 at "),  # bo's since
    (["5"], "#5 (item 2 · North): made by bo, not by you (OS user ana)"),
    (["1", "77"], "no record #77"),
    (["1", "1", "3"], None),  # the same record twice is one
])
def test_named_records_are_all_or_nothing(book, capsys, records, why):
    before = book.read_bytes()
    code = revoke(book, "--record", *records, "--note", "n")
    if why is None:
        assert code == 0 and [standing(book, i) for i in (1, 3)] == [None, None]
        return
    assert code == 2 and book.read_bytes() == before
    err = capsys.readouterr().err
    assert why in err and err.rstrip().endswith("nothing was withdrawn") and len(err.strip().splitlines()) == 1


def test_a_decision_under_a_later_one_is_not_withdrawn(book, capsys):
    """Only the decision in effect: ana's accept #6 under her own hold #7 is refused, naming the hold."""
    latest = ledger.Ledger(book).histories[series_id(key(9))].latest["digest"]
    ledger.Ledger(book).append([ledger.Entry(series=key(9), action="hold", fingerprint=FP, results=RESULTS,
                                             note="wait", supersedes=latest)], ANA)  # #7, over ana's #6
    before = book.read_bytes()
    assert revoke(book, "--record", "6", "--note", "n") == 2 and book.read_bytes() == before
    assert "#6 (item 9 · North): no longer stands (ana held at " in capsys.readouterr().err


def test_a_batch_is_withdrawn_where_it_still_stands_and_the_rest_counted(book, capsys):
    assert revoke(book, "--batch", "3", "--note", "accepted the wrong file") == 0
    assert [standing(book, i) for i in (1, 3, 4)] == [None, None, None]
    assert standing(book, 2)["analyst"] == "bo"  # bo's override over ana's batch member: left
    err = capsys.readouterr().err
    assert "withdrew 3 decisions; 1 of the batch left as they are (no longer standing, or not yours)" in err
    before = book.read_bytes()
    assert revoke(book, "--batch", "1", "--note", "again") == 2 and book.read_bytes() == before
    assert "none of the batch of #1 is still standing and yours" in capsys.readouterr().err


def test_another_users_batch_is_not_withdrawn(book, capsys, monkeypatch):
    monkeypatch.setattr(revoke_cli, "identity", lambda analyst: BO)
    before = book.read_bytes()
    assert revoke(book, "--batch", "1", "--note", "not mine") == 2 and book.read_bytes() == before
    assert "made by ana, not by you (OS user bo)" in capsys.readouterr().err


@pytest.mark.parametrize("args, said", [
    (["--record", "1", "--note", "  "], "--note: say why"),
    (["--record", "1"], "the following arguments are required: --note"),
    (["--note", "x"], "one of the arguments --record --batch is required"),
])
def test_a_reason_and_a_target_are_required(book, capsys, args, said):
    before = book.read_bytes()
    try:
        code = revoke(book, *args)
    except SystemExit as stop:  # argparse's own refusals
        code = stop.code
    assert code == 2 and book.read_bytes() == before
    assert said in capsys.readouterr().err


def test_a_broken_or_missing_ledger_is_refused_and_left_as_it_is(book, capsys, tmp_path):
    lines = book.read_bytes().splitlines(keepends=True)
    lines[1] = lines[1].replace(b'"poly1"', b'"poly4"', 1)
    book.write_bytes(b"".join(lines))
    before = book.read_bytes()
    assert revoke(book, "--record", "6", "--note", "n") == 2 and book.read_bytes() == before
    assert "the chain is broken" in capsys.readouterr().err
    assert revoke(tmp_path / "none.jsonl", "--record", "1", "--note", "n") == 2
    assert "no such ledger: nothing to withdraw" in capsys.readouterr().err
    assert not (tmp_path / "none.jsonl").exists()


@pytest.mark.parametrize("args, said", [
    (["--record", "1_0", "--note", "n"], "expected a record number as 'ledger show' prints it (12 or #12), got '1_0'"),
    (["--record", "+4", "--note", "n"], "got '+4'"),
    (["--record", "\u0663", "--note", "n"], "got '\u0663'"),  # an Arabic-Indic three: int() reads it
    (["--record", "0", "--note", "n"], "got '0'"),
    (["--record", "1", "--note", "x", "--note", "y"], "--note given twice"),
    (["--batch", "1", "--batch", "6", "--note", "x"], "--batch given twice"),
])
def test_numbers_and_notes_are_read_as_written(book, capsys, args, said):
    before = book.read_bytes()
    with pytest.raises(SystemExit) as stop:
        revoke(book, *args)
    assert stop.value.code == 2 and book.read_bytes() == before and said in capsys.readouterr().err


def test_a_record_number_as_shown_and_a_note_told_what_to_do(book, capsys):
    assert revoke(book, "--record", "#6", "--note", "as shown") == 0 and standing(book, 9) is None
    ledger.Ledger(book).append([ledger.Entry(series=key(1), action="note", fingerprint=FP, results=RESULTS,
                                             note="see", supersedes=ledger.Ledger(book).histories[
                                                 series_id(key(1))].latest["digest"])], ANA)  # #8
    assert revoke(book, "--record", "8", "--note", "n") == 2
    assert "a note, not a decision: it changes nothing to withdraw (add a note" in capsys.readouterr().err


def test_a_batch_named_by_a_lone_record_says_so(book, capsys):
    assert revoke(book, "--batch", "6", "--note", "n") == 0
    assert "withdrew 1 decision (#6 was appended alone, a batch of one: itself only) → " in capsys.readouterr().err


def test_it_names_what_it_withdrew_and_another_display_name_of_the_same_os_user(book, monkeypatch, capsys):
    """Two analysts sharing an OS account: 'Ben' withdrew Ana's accept, and nothing said whose it was ('withdrew 1
    decision'; a trial).  The decisions withdrawn are named, and the other display name said with the rule."""
    monkeypatch.setattr(revoke_cli, "identity", lambda analyst: ledger.Identity("Ben", "ana", "host"))
    assert revoke(book, "--record", "6", "--note", "needs a fresh look") == 0
    err = capsys.readouterr().err.splitlines()
    assert err[1].startswith("  #6 item 9 · North: ana accepted poly1 at ")
    assert err[3].startswith("note: withdrawn under the name 'Ben', recorded under 'ana' by the same OS user (ana)")
    assert revoke(book, "--record", "3", "--note", "again", "-q") == 0  # not a summary: said with -q too (a trial)
    assert capsys.readouterr().err.startswith("note: withdrawn under the name 'Ben', recorded under 'ana'")


def test_a_batch_withdrawn_names_five_and_counts_the_rest(tmp_path, monkeypatch, capsys):
    path = tmp_path / "decisions.jsonl"
    ledger.Ledger(path).append([accept(i) for i in range(1, 9)], ANA)
    monkeypatch.setattr(revoke_cli, "identity", lambda analyst: ANA)
    assert revoke(path, "--batch", "1", "--note", "wrong file") == 0
    err = capsys.readouterr().err.splitlines()
    assert [line.split(":")[0] for line in err[1:6]] == [f"  #{i} item {i} · North" for i in range(1, 6)]
    assert err[6] == "  … and 3 more (pricefold ledger show lists them)" and err[7].startswith("ledger head ")
    assert len(err) == 8  # no note: every one was recorded under this name


def test_a_space_at_the_end_of_a_key_value_is_shown_in_the_summary(tmp_path, monkeypatch, capsys):
    """A trial: 'drunim crisps 140 g  · Oskar Flats' — a product's trailing space read as a double space."""
    path = tmp_path / "decisions.jsonl"
    ledger.Ledger(path).append([ledger.Entry(series={"product": "item 1 ", "region": "North"}, action="accept",
                                             fingerprint=FP, results=RESULTS, model="poly1", proposed="poly1")], ANA)
    monkeypatch.setattr(revoke_cli, "identity", lambda analyst: ANA)
    assert revoke(path, "--record", "1", "--note", "a fresh look") == 0
    assert capsys.readouterr().err.splitlines()[1].startswith("  #1 item 1⟨U+0020⟩ · North: ana accepted poly1 at ")
