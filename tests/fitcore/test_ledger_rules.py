"""The rules every append obeys under its lock: supersedes, stop flags, repeats, revoke, carry."""
from __future__ import annotations

import math
import multiprocessing
import re
from datetime import datetime, timezone

import pytest

from fitcore import ledger
from fitcore.ledger.replay import series_id
from tests.fitcore.ledger_support import ANA, BO, after, entry

AT = datetime(2026, 11, 3, 14, 2, 11, 123000, tzinfo=timezone.utc)


def clock():
    return AT


def unchanged(path, action):
    """Run ``action`` (which must raise) and check the file did not change."""
    before = path.read_bytes() if path.exists() else None
    with pytest.raises(ledger.LedgerError) as info:
        action()
    assert (path.read_bytes() if path.exists() else None) == before
    assert "\n" not in str(info.value)
    return info.value


def test_a_decision_on_a_series_that_moved_on_is_refused_with_who_did_what(tmp_path):
    path = tmp_path / "ledger.jsonl"
    mine, theirs = ledger.Ledger(path), ledger.Ledger(path)
    assert after(mine, "a") is None
    ledger.append(path, [entry("a")], ANA, now=clock)  # ana decides first
    error = unchanged(path, lambda: theirs.append([entry("a", "hold", supersedes=None)], BO))
    assert isinstance(error, ledger.LedgerConflict)
    assert str(error) == "ana accepted poly1 at 14:02:11 UTC; look again"
    assert error.latest["analyst"] == "ana" and error.latest["seq"] == 1
    # Having looked again (the reader now holds ana's record), bo's hold goes through.
    [hold] = theirs.append([entry("a", "hold", supersedes=after(theirs, "a"))], BO)
    assert hold["supersedes"] == error.latest["digest"]
    # A digest the ledger never held on this series is refused too.
    error = unchanged(path, lambda: theirs.append([entry("b", supersedes="ab" * 32)], BO))
    assert isinstance(error, ledger.LedgerConflict) and error.latest is None


def _race(path, name, barrier, outcomes):
    book = ledger.Ledger(path)
    who = ledger.Identity(name, name, "h")
    barrier.wait()
    try:
        book.append([entry("contested", "hold" if name == "bo" else "accept", supersedes=after(book, "contested"))],
                    who)
        outcomes.put((name, "recorded"))
    except ledger.LedgerConflict as exc:
        outcomes.put((name, str(exc)))


def test_two_processes_racing_on_one_series_exactly_one_wins(tmp_path):
    context = multiprocessing.get_context("fork")
    for round_ in range(8):
        path = tmp_path / f"race{round_}.jsonl"
        ledger.append(path, [entry("contested", "note", note="seen by both")], ANA)
        barrier, outcomes = context.Barrier(2), context.Queue()
        workers = [context.Process(target=_race, args=(path, name, barrier, outcomes)) for name in ("ana", "bo")]
        for w in workers:
            w.start()
        for w in workers:
            w.join(30)
        results = dict(outcomes.get(timeout=5) for _ in workers)
        winners = [name for name, outcome in results.items() if outcome == "recorded"]
        assert len(winners) == 1, results
        [loser] = set(results) - set(winners)
        verb = "accepted poly1" if winners[0] == "ana" else "held"
        assert results[loser].startswith(f"{winners[0]} {verb} at ") and results[loser].endswith("; look again")
        book = ledger.Ledger(path)
        assert book.state == "intact" and [r["action"] for r in book.records][1:] == [
            "accept" if winners[0] == "ana" else "hold"]


def test_accepting_past_a_stop_flag_needs_a_note(tmp_path):
    path = tmp_path / "ledger.jsonl"
    error = unchanged(path, lambda: ledger.append(path, [entry("a", flags=["weak-fit", "rising"])], ANA))
    assert "accepting past a stop flag (rising) needs a note" in str(error)
    [ok] = ledger.append(path, [entry("a", flags=["weak-fit", "rising"], note="promo over; checked")], ANA)
    assert ok["flags"] == ["weak-fit", "rising"]
    ledger.append(path, [entry("b", flags=["weak-fit"])], ANA)  # a warn flag alone needs no note
    ledger.append(path, [entry("c", flags=["stale"])], ANA)  # re-signing a stale series is normal


def test_accepting_a_shifted_series_needs_a_note(tmp_path):
    """Before: a series whose signed curve failed its backtest (+447% at the plan price) was re-signed with one key
    and no note, and the report could not say why."""
    path = tmp_path / "ledger.jsonl"
    error = unchanged(path, lambda: ledger.append(path, [entry("a", flags=["stale", "shifted"])], ANA))
    assert "accepting past the shifted flag needs a note saying why" in str(error)
    error = unchanged(path, lambda: ledger.append(path, [entry("a", flags=["rising", "shifted"])], ANA))
    assert "accepting past a stop flag (rising) and the shifted flag needs a note" in str(error)
    [ok] = ledger.append(path, [entry("a", flags=["stale", "shifted"], note="new supplier: the new curve holds")],
                         ANA)
    assert ok["note"] == "new supplier: the new curve holds"


def test_an_accept_standing_on_the_same_data_is_not_repeated(tmp_path):
    path = tmp_path / "ledger.jsonl"
    book = ledger.Ledger(path)
    book.append([entry("a")], ANA, now=clock)
    error = unchanged(path, lambda: book.append([entry("a", supersedes=after(book, "a"))], BO))
    assert "already accepted on this data (ana accepted poly1 at 14:02:11 UTC)" in str(error)
    book.append([entry("a", fingerprint="f2", supersedes=after(book, "a"))], BO)  # new data: a new sign-off
    book.append([entry("a", "override", model="poly2", note="x", fingerprint="f2", supersedes=after(book, "a"))], BO)
    book.append([entry("a", fingerprint="f2", supersedes=after(book, "a"))], ANA)  # accept after an override


def test_the_proposal_of_another_fit_may_replace_an_accept_on_the_same_data(tmp_path):
    """Results fitted otherwise on the same data (another seed) may propose another model than the one accepted:
    accepting that one is a change of model, not a repeat (it was refused as "already accepted")."""
    path = tmp_path / "ledger.jsonl"
    book = ledger.Ledger(path)
    book.append([entry("a")], ANA, now=clock)
    [second] = book.append([entry("a", model="poly4", supersedes=after(book, "a"))], BO)
    assert second["model"] == "poly4"
    assert book.histories[series_id({"product": "a"})].standing_model("f1") == "poly4"
    error = unchanged(path, lambda: book.append([entry("a", model="poly4", supersedes=after(book, "a"))], ANA))
    assert "already accepted on this data (bo accepted poly4 at " in str(error)


def test_only_the_os_user_who_decided_withdraws_a_decision(tmp_path):
    path = tmp_path / "ledger.jsonl"
    book = ledger.Ledger(path)
    book.append([entry("a")], ledger.Identity("Ana", "ana", "h1"))
    impostor = ledger.Identity("Ana", "mallory", "h1")
    error = unchanged(path, lambda: book.append([entry("a", "revoke", supersedes=after(book, "a"))], impostor))
    assert "no decision of yours (mallory) stands to withdraw; the standing decision is Ana (ana)'s" in str(error)
    [revoked] = book.append([entry("a", "revoke", supersedes=after(book, "a"))], ledger.Identity("A. N.", "ana", "h2"))
    assert book.histories[series_id({"product": "a"})].status("f1") == "pending" and revoked["os_user"] == "ana"
    error = unchanged(path, lambda: book.append([entry("a", "revoke", supersedes=after(book, "a"))], ANA))
    assert "no decision of yours (ana) stands to withdraw" in str(error)


def test_one_carry_per_series_and_data(tmp_path):
    path = tmp_path / "ledger.jsonl"
    book = ledger.Ledger(path)
    signed = {"candidate": "poly1", "family": "poly", "coef": [2372.06, -605.05], "controls": None}
    [accept] = book.append([entry("a", signed=signed)], ANA)
    assert accept["signed"] == signed
    carry = entry("a", "carry", fingerprint="f2", carries=accept["digest"], supersedes=accept["digest"])
    [carried] = book.append([carry], BO)
    assert carried["carries"] == accept["digest"]
    assert book.histories[series_id({"product": "a"})].status("f2") == "accepted"
    again = entry("a", "carry", fingerprint="f2", carries=accept["digest"], supersedes=carried["digest"])
    assert "already carried to this data (bo carried poly1 forward at" in str(unchanged(path, lambda: book.append(
        [again], ANA)))
    wrong = entry("b", "carry", fingerprint="f2", carries=accept["digest"])
    assert "a carry must name an accept or override of this series" in str(unchanged(path, lambda: book.append(
        [wrong], ANA)))
    # withdrawn (a carry run taken back with ``ledger revoke --batch``), it is not carried again by anyone (a
    # note decides nothing) until a person decides the series; then that decision is carried as any other
    book.append([entry("a", "revoke", fingerprint="f2", supersedes=carried["digest"])], BO)
    assert book.histories[series_id({"product": "a"})].status("f2") == "stale"
    book.append([entry("a", "note", note="asked the buyer", fingerprint="f2", supersedes=after(book, "a"))], ANA)
    for who in (ANA, BO):
        said = str(unchanged(path, lambda: book.append([entry("a", "carry", fingerprint="f2", carries=accept["digest"],
                                                              supersedes=after(book, "a"))], who)))
        assert re.fullmatch(r"a: bo withdrew a decision at \d\d:\d\d:\d\d UTC and nobody has decided it since: what "
                            "stands again is for a person to accept, override or hold, not to carry", said), said
    [accept_again] = book.append([entry("a", fingerprint="f2", signed=signed, supersedes=after(book, "a"))], ANA)
    [again_done] = book.append([entry("a", "carry", fingerprint="f3", carries=accept_again["digest"],
                                      supersedes=accept_again["digest"])], BO)
    assert book.histories[series_id({"product": "a"})].current["digest"] == again_done["digest"]


@pytest.mark.parametrize("bad, words", [
    (dict(action="note", note="n", signed={"candidate": "poly1"}), "only accept, override, carry record a signed model"),
    (dict(signed=[1, 2]), "expected the signed model as an object or None"),
    (dict(signed={"coef": [1.0, math.nan]}), "expected finite numbers in the signed model"),
    (dict(carries="ab" * 32), "a carry names the decision it carries forward"),
    (dict(action="carry"), "a carry names the decision it carries forward"),
    (dict(supersedes="latest"), "expected 'supersedes' as a record digest"),
    (dict(flags="rising"), "expected 'flags' as a list of flag codes"),
    (dict(action="approve"), "expected an action among accept, override, note, hold, revoke, carry"),
])
def test_entries_that_cannot_be_records_are_refused(tmp_path, bad, words):
    path = tmp_path / "ledger.jsonl"
    fields = {"action": "accept", **bad}
    action = fields.pop("action")
    assert words in str(unchanged(path, lambda: ledger.append(path, [entry("a", action, **fields)], ANA)))


def test_one_append_decides_each_series_once(tmp_path):
    path = tmp_path / "ledger.jsonl"
    error = unchanged(path, lambda: ledger.append(path, [entry("a"), entry("a", "hold")], ANA))
    assert "one append records at most one decision per series" in str(error)


def _signed(last_date):
    return {"candidate": "poly1", "last_date": last_date}


def test_a_decision_on_older_data_cannot_replace_one_made_on_newer_data(tmp_path):
    """Two analysts, one ledger: bo on last cycle's results (rows to 2026-02-23), ana on this cycle's (rows to
    2026-04-20).  Whatever order they look in, bo's accept, override or hold must not replace ana's decision;
    the refusal names the newer data and leaves the file as it was."""
    path = tmp_path / "ledger.jsonl"
    ledger.append(path, [entry("tea", fingerprint="c1", signed=_signed("2026-02-23"))], ANA, now=clock)
    book = ledger.Ledger(path)
    [carried] = book.append([entry("tea", "carry", fingerprint="c2", signed=_signed("2026-04-20"),
                                   carries=book.records[0]["digest"], supersedes=after(book, "tea"))], ANA, now=clock)
    for action, fields in (("accept", {"signed": _signed("2026-02-23")}),
                           ("override", {"note": "steeper", "model": "poly2", "signed": _signed("2026-02-23")}),
                           ("hold", {"last_date": "2026-02-23"}), ("hold", {})):  # no date: the c1 accept's
        error = unchanged(path, lambda: book.append([entry("tea", action, fingerprint="c1",
                                                           supersedes=carried["digest"], **fields)], BO))
        assert str(error) == ("tea: ana carried poly1 forward at 14:02:11 UTC on newer data (rows to 2026-04-20; "
                              "the rows shown end 2026-02-23); open the newer results to decide it")
    # a note or a revoke decides nothing: they stay open to the older screen
    book.append([entry("tea", "note", fingerprint="c1", note="seen", supersedes=carried["digest"])], BO)
    # A series ana decided first on this cycle's data, never decided on last cycle's: bo's hold on the older
    # rows is refused by their last date alone (``Entry.last_date``; a hold signs no model).
    [new] = book.append([entry("nuts", fingerprint="n2", signed=_signed("2026-04-20"))], ANA)
    unchanged(path, lambda: book.append([entry("nuts", "hold", fingerprint="n1", last_date="2026-02-23",
                                               supersedes=new["digest"])], BO))
    # The other way round is the usual next cycle: a decision on newer rows replaces one on older rows.
    [old] = book.append([entry("gel", "hold", fingerprint="g1", last_date="2026-02-23")], BO)
    book.append([entry("gel", fingerprint="g2", signed=_signed("2026-04-20"), supersedes=old["digest"])], ANA)


def test_without_dates_the_order_the_data_were_decided_in_tells_which_is_newer(tmp_path):
    path = tmp_path / "ledger.jsonl"
    book = ledger.Ledger(path)
    [first] = book.append([entry("soap", fingerprint="s1", signed=_signed(None))], ANA)
    [second] = book.append([entry("soap", "hold", fingerprint="s2", supersedes=first["digest"])], ANA)
    error = unchanged(path, lambda: book.append([entry("soap", fingerprint="s1", model="poly2", signed=_signed(None),
                                                       supersedes=second["digest"])], BO))
    assert str(error).endswith("on newer data (decided on after the data shown); open the newer results to decide it")
    # data the ledger never saw are not older than anything (a third cycle, say)
    book.append([entry("soap", fingerprint="s3", signed=_signed(None), supersedes=second["digest"])], BO)


def test_a_hold_keeps_its_rows_last_date_so_an_older_screen_cannot_replace_it(tmp_path):
    """bo holds on this cycle's rows (to 2026-09-07); ana, on last cycle's results never decided before, held or
    accepted over it: a hold recorded no date, so nothing told the rows apart, and bo was then refused "on newer
    data" by the order the data were decided in.  A hold's record now keeps its rows' last date."""
    path = tmp_path / "ledger.jsonl"
    book = ledger.Ledger(path)
    [held] = book.append([entry("flour", "hold", fingerprint="c2", last_date="2026-09-07")], BO)
    assert held["last_date"] == "2026-09-07" and ledger.Ledger(path).state == ledger.INTACT
    for action, fields in (("hold", {"last_date": "2026-07-27"}), ("accept", {"signed": _signed("2026-07-27")})):
        error = unchanged(path, lambda: book.append([entry("flour", action, fingerprint="c1", supersedes=held["digest"],
                                                           **fields)], ANA))
        assert "on newer data (rows to 2026-09-07; the rows shown end 2026-07-27)" in str(error)
    # A hold recorded before holds kept their date, on older rows after newer ones: the newer screen decides
    # (one side dated: nothing tells, nothing refused), not locked out "on newer data".
    [legacy] = book.append([entry("nuts", "hold", fingerprint="n2", last_date="2026-09-07")], BO)
    [old] = book.append([entry("nuts", "hold", fingerprint="n1", supersedes=legacy["digest"])], ANA)
    book.append([entry("nuts", "hold", fingerprint="n2", last_date="2026-09-07", supersedes=old["digest"])], BO)
