"""A later cycle's decisions never go silently into a new ledger.

A trial: ``fit c2.csv -o r2.json --ledger r1.ledger.jsonl``, then ``triage r2.json`` without ``--ledger``.  The
screen's default ledger is the one beside the results, ``r2.ledger.jsonl``: a new one, every series pending,
and a hold went into it without a question (a notification said it for 10 s).  Now a recording command
without ``--ledger`` refuses, in one line, results fitted against another ledger than its default, before
anything is opened; ``accept-unflagged``, which has no default, names that ledger as the way on.
"""
from __future__ import annotations

import shutil

import pytest

from pricefold import triage_cli
from pricefold.cli import main
from tests.cli.test_cycle import fit, write_weeks


def second_cycle(folder):
    """``folder`` with the first cycle signed into ``r1.ledger.jsonl`` (the default beside ``r1.json``) and the
    second cycle fitted against it as ``r2.json`` and ``r2.parquet``, and against a copy beside them under their
    own default name, ``r3.ledger.jsonl``, as ``r3.json`` and ``r3.parquet``."""
    book = folder / "r1.ledger.jsonl"
    write_weeks(folder / "c1.csv", 40)
    fit(folder / "c1.csv", folder / "r1.json")
    assert main(["ledger", "accept-unflagged", str(folder / "r1.json"), "--ledger", str(book), "-q"]) == 0
    write_weeks(folder / "c2.csv", 44)
    shutil.copy(book, folder / "r3.ledger.jsonl")
    for name, ledger_path in (("r2", book), ("r3", folder / "r3.ledger.jsonl")):
        for suffix in (".json", ".parquet"):
            assert main(["fit", str(folder / "c2.csv"), "--date", "week", "--plan-price", "2.3", "--degrees", "0-1",
                         "--no-loglog", "-o", str(folder / f"{name}{suffix}"), "--quiet",
                         "--ledger", str(ledger_path)]) == 0
    return book


@pytest.fixture(scope="module")
def cycle(tmp_path_factory):
    folder = tmp_path_factory.mktemp("fitted")
    return folder, second_cycle(folder)


@pytest.fixture
def opened(monkeypatch):
    """The ledgers the triage screen was opened on (the screen itself replaced: it needs a terminal)."""
    calls = []

    def open_triage(source, ledger_path, analyst, stored=None, prepare=None):
        calls.append(ledger_path)
        return 0
    monkeypatch.setattr(triage_cli, "open_triage", open_triage)
    return calls


@pytest.mark.parametrize("suffix", [".json", ".parquet"])
def test_triage_without_ledger_refuses_the_default_beside_results_fitted_against_another(cycle, opened, capsys,
                                                                                          suffix):
    folder, book = cycle
    results, default = folder / f"r2{suffix}", folder / "r2.ledger.jsonl"
    before = book.read_bytes()
    capsys.readouterr()
    assert main(["triage", str(results), "--analyst", "ana"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1, err  # one line
    assert err.startswith(f"pricefold triage: {results}: fitted against the ledger {book}, not {default}")
    assert f"give --ledger {book} to decide in that one, or --ledger {default} to record in the default" in err
    assert opened == [] and not default.exists() and book.read_bytes() == before


def test_accept_unflagged_without_ledger_names_the_one_the_results_were_fitted_against(cycle, capsys):
    folder, book = cycle
    results = folder / "r2.json"
    before = book.read_bytes()
    capsys.readouterr()
    assert main(["ledger", "accept-unflagged", str(results), "--analyst", "ana"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1, err
    assert err.startswith(f"pricefold ledger: {results}: fitted against the ledger {book}, and accept-unflagged "
                          "records only into the ledger --ledger names: give --ledger ")
    assert f"--ledger {book} to accept into that one" in err
    assert not (folder / "r2.ledger.jsonl").exists() and book.read_bytes() == before


def test_accept_unflagged_without_ledger_on_results_fitted_without_one_asks_for_it(tmp_path, capsys):
    write_weeks(tmp_path / "c1.csv", 40)
    fit(tmp_path / "c1.csv", tmp_path / "r1.json")
    capsys.readouterr()
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json")]) == 2
    err = capsys.readouterr().err
    assert err == ("pricefold ledger: accept-unflagged records only into the ledger --ledger names: give --ledger "
                   "LEDGER (see pricefold ledger accept-unflagged --help)\n")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["c1.csv", "r1.json"]


@pytest.mark.parametrize("suffix", [".json", ".parquet"])
def test_results_fitted_against_their_own_default_open_on_it(cycle, opened, suffix):
    """Not refused: the default beside ``r3`` is the ledger it was fitted against (a naive rule — refuse whenever
    the results name a ledger and --ledger is left out — fails here)."""
    folder, _ = cycle
    assert main(["triage", str(folder / f"r3{suffix}"), "--analyst", "ana"]) == 0
    assert opened == [folder / "r3.ledger.jsonl"]


def test_a_ledger_given_or_a_data_file_is_not_refused(cycle, opened, tmp_path):
    """``--ledger`` given is a choice, kept (the screen names both ledgers: ``tests/tui/test_fitted_ledger.py``);
    a data file has no ledger it was fitted against (the README's first cycle)."""
    folder, book = cycle
    other = tmp_path / "other.jsonl"
    assert main(["triage", str(folder / "r2.json"), "--ledger", str(other), "--analyst", "ana"]) == 0
    assert main(["triage", str(folder / "c2.csv"), "--date", "week", "--analyst", "ana"]) == 0
    assert opened == [other, folder / "c2.ledger.jsonl"]


@pytest.mark.parametrize("suffix", [".json", ".parquet"])
def test_report_without_ledger_refuses_the_default_beside_results_fitted_against_another(cycle, capsys, suffix):
    """The same trap in a report: the default beside a later cycle's results is no ledger (or not theirs), and the
    page called every series pending.  One line naming the fitted ledger, no page; given it, the page is made;
    results fitted against their own default need no --ledger."""
    pytest.importorskip("matplotlib")
    folder, book = cycle
    page = folder / f"page{suffix}.html"
    capsys.readouterr()
    assert main(["report", str(folder / f"r2{suffix}"), "-o", str(page)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and f"--ledger {book}" in err and "nothing was written" in err, err
    assert not page.exists() and not (folder / "r2.ledger.jsonl").exists()
    assert main(["report", str(folder / f"r2{suffix}"), "--ledger", str(book), "-o", str(page)]) == 0
    assert main(["report", str(folder / f"r3{suffix}"), "-o", str(folder / f"own{suffix}.html")]) == 0
