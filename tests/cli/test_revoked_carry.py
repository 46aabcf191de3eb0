"""A series whose standing decision was left standing by a revoke, nobody having decided it since, is due a person:
``ledger carry`` leaves it (``revoked``), ``show --ledger`` says so in the same words, and the ledger refuses a carry
there.

A trial found a carry revoked ("want a fresh look") carried again by the next routine cycle: the accept the carry
had carried stood again, was refitted, passed its backtest and was carried by whoever ran carry next.  What a
revoke leaves standing is a fallback, not a fresh sign-off."""
from __future__ import annotations

import json
import re

import pytest

from fitcore import ledger
from fitcore.ledger.snapshot import from_records
from pricefold.cli import main
from tests.cli.test_changed_since_fit import carry_counts, record_number, show_dues
from tests.cli.test_cycle import fit, histories, write_weeks

REVOKED = "item 3"  # the series whose carry (or hand decision) is revoked
WHY = "plan price cut 10pct; want a fresh look"
BO = ledger.Identity("bo", "bo", "host")
CY = ledger.Identity("cy", "cy", "host")


def first_cycle_then_second(folder, suffix: str = ".json"):
    """``(ledger, the second cycle's results)``: 40 weeks fitted and every series accepted; 44 weeks fitted with
    ``--ledger`` into ``r2{suffix}``."""
    book = folder / "ledger.jsonl"
    write_weeks(folder / "c1.csv", 40, seed=9)
    fit(folder / "c1.csv", folder / "r1.json")
    assert main(["ledger", "accept-unflagged", str(folder / "r1.json"), "--ledger", str(book), "-q"]) == 0
    write_weeks(folder / "c2.csv", 44, seed=9)
    return book, fit_again(folder, f"r2{suffix}", book)


def fit_again(folder, name: str, book, weeks: str = "c2.csv"):
    results = folder / name
    assert main(["fit", str(folder / weeks), "--date", "week", "--plan-price", "2.3", "--degrees", "0-1",
                 "--no-loglog", "-o", str(results), "--quiet", "--ledger", str(book)]) == 0
    return results


def carry_revoked(folder, suffix: str, capsys=None):
    """The trial's sequence: the second cycle carried, ``REVOKED``'s carry revoked with a note (what the revoke
    says checked, given ``capsys``), the same data fitted again with ``--ledger`` (so the fit read the revoke):
    ``(ledger, those results)``."""
    book, results = first_cycle_then_second(folder, suffix)
    assert main(["ledger", "carry", str(results), "--ledger", str(book), "-q"]) == 0
    assert histories(book)[REVOKED].current["action"] == "carry"
    assert main(["ledger", "revoke", str(book), "--record", str(record_number(book, REVOKED)), "--note", WHY,
                 "--analyst", "bo"] + ["-q"] * (capsys is None)) == 0
    if capsys is not None:
        assert ("an earlier decision stands again: 'ledger carry' will not carry it to new data until someone "
                "accepts, overrides or holds the series\n") in capsys.readouterr().err
    return book, fit_again(folder, f"r2b{suffix}", book)


def hand_accept(book, record: dict, who: ledger.Identity) -> dict:
    """An accept of the proposal of a (JSON) results ``record``, with its signed snapshot, as the screen records it."""
    [signed] = from_records([(record, record["chosen"])], 0.95)
    [written] = ledger.append(book, [ledger.Entry(
        series=record["key"], action="accept", fingerprint=record["fingerprint"], results="ab" * 32,
        model=record["chosen"], proposed=record["chosen"],
        supersedes=histories(book)[record["key"]["product"]].latest["digest"], signed=signed,
        last_date=signed.get("last_date"))], who)
    return written


@pytest.mark.parametrize("suffix", [".json", ".parquet"])
def test_a_revoked_carry_waits_for_a_person_then_a_later_cycle_carries_it(tmp_path, capsys, suffix):
    book, results = carry_revoked(tmp_path, suffix, capsys)
    dues = show_dues(results, book, capsys)
    assert dues == {"revoked": 1}, dues  # the other seven stand carried to these data: due nothing
    assert carry_counts(results, book, capsys) == dues  # each stale series in exactly one of carry's counts
    assert main(["ledger", "carry", str(results), "--ledger", str(book), "--carry-revised"]) == 0
    assert "left for a human: 1 (revoked 1)" in capsys.readouterr().err
    history = histories(book)[REVOKED]
    assert history.latest["action"] == "revoke" and history.current["action"] == "accept"  # nothing carried
    assert main(["show", str(results), "--ledger", str(book), "--product", REVOKED]) == 0
    said = re.search(r"ledger: stale — due: (.*)\n", capsys.readouterr().out).group(1)
    assert re.fullmatch(rf'revoked by bo(?: \(\S+\))? at 2\d\d\d-\d\d-\d\d \d\d:\d\d UTC: "{WHY}"', said), said
    # a person decides it on these data: due nothing now, and the next cycle carries it as any other
    hand_accept(book, fit(tmp_path / "c2.csv", tmp_path / "hand.json")[REVOKED], CY)
    assert show_dues(results, book, capsys) == {} and carry_counts(results, book, capsys) == {}
    write_weeks(tmp_path / "c3.csv", 48, seed=9)
    third = fit_again(tmp_path, f"r3{suffix}", book, "c3.csv")
    dues = show_dues(third, book, capsys)
    assert dues == {"backtest passed": 8}, dues
    assert carry_counts(third, book, capsys) == dues
    history = histories(book)[REVOKED]
    assert history.current["action"] == "carry" and history.decision["analyst"] == "cy"


def test_a_revoked_hand_decision_leaves_the_older_one_for_a_person(tmp_path, capsys):
    """bo accepts on this cycle's data by hand, then takes it back: the accept on last cycle's data stands again,
    passes its backtest on these rows, and used to be carried by the next carry."""
    book, results = first_cycle_then_second(tmp_path)
    record = next(r for r in json.loads(results.read_text())["series"] if r["key"]["product"] == REVOKED)
    accept = hand_accept(book, record, BO)
    ledger.append(book, [ledger.Entry(series=accept["series"], action="revoke", fingerprint=accept["fingerprint"],
                                      results="ab" * 32, note="not this week", supersedes=accept["digest"])], BO)
    history = histories(book)[REVOKED]
    assert history.current["fingerprint"] != accept["fingerprint"]  # last cycle's accept stands again
    again = fit_again(tmp_path, "r2b.json", book)
    dues = show_dues(again, book, capsys)
    assert dues == {"revoked": 1, "backtest passed": 7}, dues
    assert carry_counts(again, book, capsys) == dues
    assert histories(book)[REVOKED].latest["action"] == "revoke"
    assert main(["show", str(again), "--ledger", str(book), "--product", REVOKED]) == 0
    assert 'ledger: stale — due: revoked by bo at ' in capsys.readouterr().out
    # the results fitted before the hand decision: the fit never read the revoke, changed since the fit first
    dues = show_dues(results, book, capsys)
    assert dues == {"changed since the fit": 1}, dues  # (the other seven carried to these data just above)
    assert carry_counts(results, book, capsys) == dues


def test_an_override_withdrawn_back_to_the_carry_on_the_same_data_is_carried_next_cycle(tmp_path, capsys):
    """A trial: bo overrode a carried series on this cycle's data, then took the override back ('changed my mind'):
    the carry on these same data stands again, seen — no fallback.  The next cycle read 'due: revoked by bo …'
    beside 'bo carried loglog forward' and left it for a person; it is carried as any other."""
    book, results = first_cycle_then_second(tmp_path)
    assert main(["ledger", "carry", str(results), "--ledger", str(book), "-q"]) == 0
    record = next(r for r in json.loads(results.read_text())["series"] if r["key"]["product"] == REVOKED)
    other = next(c["name"] for c in record["candidates"] if c["available"] and c["name"] != record["chosen"])
    [override] = ledger.append(book, [ledger.Entry(
        series=record["key"], action="override", fingerprint=record["fingerprint"], results="ab" * 32, model=other,
        proposed=record["chosen"], note="a second look", supersedes=histories(book)[REVOKED].latest["digest"],
        signed=from_records([(record, other)], 0.95)[0])], BO)
    ledger.append(book, [ledger.Entry(series=record["key"], action="revoke", fingerprint=record["fingerprint"],
                                      results="ab" * 32, note="changed my mind", supersedes=override["digest"])], BO)
    history = histories(book)[REVOKED]
    assert history.current["action"] == "carry" and history.current["fingerprint"] == record["fingerprint"]
    assert history.revoked is None
    write_weeks(tmp_path / "c3.csv", 48, seed=9)
    third = fit_again(tmp_path, "r3.json", book, "c3.csv")
    dues = show_dues(third, book, capsys)
    assert dues == {"backtest passed": 8}, dues
    assert carry_counts(third, book, capsys) == dues
