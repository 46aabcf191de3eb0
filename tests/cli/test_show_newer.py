"""``show --ledger`` on last cycle's results, where the ledger already holds decisions on newer data.

The screen says such a series is "decided on newer data: open the newer results" (the ledger refuses
decisions there); ``show`` must say the same, by the same rule (``fitcore.ledger.rules.decided_on_newer``),
whether the old results hold no backtest (fitted without ``--ledger``), hold one computed before the newer
decision was recorded, or are a Parquet list (which reads no whole record).  Invented weekly series
(``tests.cli.test_cycle.write_weeks``); what is checked is pricefold's own bookkeeping.
"""
from __future__ import annotations

import json

import pytest

from fitcore import ledger
from fitcore.ledger.rules import NEWER_DUE, NEWER_DUE_SHORT
from fitcore.ledger.snapshot import from_records
from pricefold.cli import main
from tests.cli.test_cycle import histories, write_weeks

COMMON = ["--date", "week", "--plan-price", "2.3", "--degrees", "0-1", "--no-loglog", "--quiet"]
LATE = "item 0"  # pending in the first cycle, accepted only on the second cycle's rows
ANA = ledger.Identity("ana", "ana", "host")


def records(path) -> dict:
    return {r["key"]["product"]: r for r in json.loads(path.read_text())["series"]}


def accept(book, record) -> None:
    history = histories(book).get(record["key"]["product"]) if book.exists() else None
    ledger.append(book, [ledger.Entry(series=record["key"], action="accept", fingerprint=record["fingerprint"],
                                      results="ab" * 32, model=record["chosen"], proposed=record["chosen"],
                                      note="checked", supersedes=history.latest["digest"] if history else None,
                                      signed=from_records([(record, record["chosen"])], 0.95)[0])], ANA)


@pytest.fixture(scope="module")
def cycles(tmp_path_factory):
    """Three cycles on one ledger: all but ``LATE`` signed on the first, carried to the second (fitted with
    --ledger, so its results hold a backtest) and then to the third; ``LATE`` accepted on the second."""
    folder = tmp_path_factory.mktemp("newer")
    book = folder / "ledger.jsonl"
    for weeks, name in ((40, "c1"), (44, "c2"), (48, "c3")):
        write_weeks(folder / f"{name}.csv", weeks)
    assert main(["fit", str(folder / "c1.csv"), *COMMON, "-o", str(folder / "r1.json")]) == 0
    assert main(["fit", str(folder / "c1.csv"), *COMMON, "-o", str(folder / "r1.parquet")]) == 0
    for product, record in records(folder / "r1.json").items():
        if product != LATE:
            accept(book, record)
    assert main(["fit", str(folder / "c2.csv"), *COMMON, "-o", str(folder / "r2.json"), "--ledger", str(book)]) == 0
    assert main(["ledger", "carry", str(folder / "r2.json"), "--ledger", str(book), "-q"]) == 0
    accept(book, records(folder / "r2.json")[LATE])
    assert main(["fit", str(folder / "c3.csv"), *COMMON, "-o", str(folder / "r3.json"), "--ledger", str(book)]) == 0
    assert main(["ledger", "carry", str(folder / "r3.json"), "--ledger", str(book), "-q"]) == 0
    return folder, book


def due_of(capsys, results, book, product) -> str:
    capsys.readouterr()
    assert main(["show", str(results), "--ledger", str(book), "--product", product]) == 0
    return next(line for line in capsys.readouterr().out.splitlines() if line.startswith("ledger: "))


def test_old_results_without_a_backtest_say_decided_on_newer_data(cycles, capsys):
    """It said "no backtest in these results (fit with --ledger)": fitting again would not help."""
    folder, book = cycles
    carried = next(p for p, h in histories(book).items() if h.current["action"] == "carry")
    for results in ("r1.json", "r1.parquet"):
        for product in (carried, LATE):
            assert due_of(capsys, folder / results, book, product) == f"ledger: stale — due: {NEWER_DUE}"


def test_a_backtest_made_before_the_newer_decision_does_not_say_what_is_due(cycles, capsys):
    """The second cycle's results were fitted with --ledger (their backtest passed); the third cycle's carry came
    after: the series is now due a look in the newer results, not "backtest passed"."""
    folder, book = cycles
    carried = [p for p, h in histories(book).items() if h.current["action"] == "carry"]
    second = records(folder / "r2.json")
    assert len(carried) == 8 and all(second[p]["backtest"]["status"] == "passed" for p in carried if p != LATE)
    for product in carried:
        assert due_of(capsys, folder / "r2.json", book, product) == f"ledger: stale — due: {NEWER_DUE}"


def test_the_list_says_it_whole_in_its_due_column_json_and_parquet(cycles, capsys):
    """The Parquet list reads no whole record: without the series' last date a series first decided on the
    newer rows (``LATE``) could not be judged and read "not backtested"."""
    folder, book = cycles
    for results in ("r1.json", "r1.parquet"):
        capsys.readouterr()
        assert main(["show", str(folder / results), "--ledger", str(book)]) == 0
        lines = capsys.readouterr().out.splitlines()
        rows = [line for line in lines[1:] if line.startswith("item ")]
        assert len(rows) == 8 and all(f" stale{' ' * 16}{NEWER_DUE_SHORT} " in row for row in rows), rows
        assert lines[0].index("ratio") > lines[0].index("due") + len(NEWER_DUE_SHORT)


def test_show_says_what_the_screen_says(cycles):
    """The triage screen on the same old Parquet results and ledger: the same words, series for series."""
    from tui.factory import open_stored_session
    folder, book = cycles
    session = open_stored_session(folder / "r1.parquet", book, ANA)
    dues = {session.keys.key_of(s)["product"]: session.due(s) for s in range(session.results.n_series)}
    assert dues == {f"item {i}": NEWER_DUE for i in range(8)}
