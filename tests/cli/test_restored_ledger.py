"""An older copy of the ledger put back after ``fit --ledger`` read it (or its last records cut off).

Only ``ledger carry`` noticed it: a trial's ``export`` wrote 155 stale rows for 139 carries the ledger no longer
held, and ``report`` and ``show --ledger`` said nothing (the chain itself verifies).  The results record the head
the fit read; every command that meets them and the ledger now checks it is still there.
"""
from __future__ import annotations

import pytest

from pricefold.cli import main

from .test_cycle import fit, write_weeks


@pytest.fixture
def restored(tmp_path):
    """The first cycle accepted, a note recorded, the second cycle fitted with --ledger (its head: the note), and
    then the copy kept before the note put back: (ledger, results)."""
    book = tmp_path / "L.jsonl"
    write_weeks(tmp_path / "c1.csv", 40, seed=9)
    fit(tmp_path / "c1.csv", tmp_path / "r1.json")
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(book), "-q"]) == 0
    backup = book.read_bytes()
    assert main(["ledger", "revoke", str(book), "--record", "1", "--note", "not this one", "-q"]) == 0
    write_weeks(tmp_path / "c2.csv", 44, seed=9)
    fit(tmp_path / "c2.csv", tmp_path / "r2.json", book)
    book.write_bytes(backup)
    assert main(["ledger", "verify", str(book)]) == 0  # the chain verifies: only the results can tell
    return book, tmp_path / "r2.json"


GONE = "no longer holds record 9:"


def test_export_refuses_results_fitted_against_records_the_ledger_no_longer_holds(restored, tmp_path, capsys):
    book, results = restored
    capsys.readouterr()
    assert main(["ledger", "export", str(book), "--results", str(results), "-o", str(tmp_path / "out.csv")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and GONE in err and "the last one 'fit --ledger' read for" in err
    assert "records were removed from its end, or an older copy put in its place" in err
    assert "nothing was written" in err and not (tmp_path / "out.csv").exists()


def test_show_says_it_first(restored, capsys):
    book, results = restored
    capsys.readouterr()
    assert main(["show", str(results), "--ledger", str(book)]) == 0
    first = capsys.readouterr().err.splitlines()[0]
    assert first.startswith(f"pricefold show: warning: {book} {GONE}")


def test_the_report_says_it_first(restored, tmp_path, capsys):
    pytest.importorskip("matplotlib")
    book, results = restored
    capsys.readouterr()
    assert main(["report", str(results), "--ledger", str(book), "-o", str(tmp_path / "r.html")]) == 0
    assert capsys.readouterr().err.startswith(f"pricefold report: warning: {book} {GONE}")
    page = (tmp_path / "r.html").read_text()
    first = page.index('role="alert"')
    assert "The ledger is not the one these results were made against" in page[first:first + 200]
    # its facts too: the chain verifies, yet 'intact' alone read as all being well beside the alert (a trial)
    assert "intact: every record's digest and link checked (SHA-256) — but it ends before records" in page


def test_accept_unflagged_refuses_them_as_carry_does(restored, capsys):
    """Before: it accepted on top of the older copy, where the revoked accept stands again (a trial)."""
    book, results = restored
    before = book.read_bytes()
    capsys.readouterr()
    assert main(["ledger", "accept-unflagged", str(results), "--ledger", str(book)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and GONE in err and "nothing was accepted" in err
    assert book.read_bytes() == before
