"""A series whose signed curve shifted, decided again after ``fit --ledger`` tested it: the backtest in the results
tested a decision that no longer stands, so its ``shifted`` flag is left out wherever it is read with the ledger
as it is now — ``ledger export`` and the report (on Parquet results, read as stored) as ``show --ledger`` already
did.  A trial: the export's ``flags`` still said ``shifted`` for an accept and an override made in cycle 2, while
``show`` said "flags: none".  A shifted series nobody decided again keeps its flag everywhere.

The cycle is the invented one of ``tests/cli/test_cycle.py``, three series' demand dropping by 40% in the new
weeks; the decisions are made as the screen makes them (``TriageSession.decide``).
"""
from __future__ import annotations

import csv
import io
from contextlib import redirect_stdout
from pathlib import Path

import pytest

from pricefold.cli import main
from tests.cli.test_cycle import first_cycle_signed, write_weeks
from tests.tui.conftest import ANA

ACCEPTED, OVERRIDDEN, LEFT = "item 3", "item 5", "item 6"  # the three whose demand drops
FIT = ["--date", "week", "--plan-price", "2.3", "--degrees", "0-1", "--no-loglog", "--quiet"]


def second_cycle_shifted(folder: Path) -> Path:
    """The first cycle signed into ``folder/ledger.jsonl``; the second cycle's data (44 weeks, the demand of
    ``ACCEPTED``, ``OVERRIDDEN`` and ``LEFT`` 40% lower from week 41) fitted with ``--ledger`` to ``r2.json`` and
    ``r2.parquet``, each of the three flagged ``shifted`` there.  Returns the ledger."""
    book = folder / "ledger.jsonl"
    first_cycle_signed(folder, book)
    write_weeks(folder / "c2.csv", 44)
    with open(folder / "c2.csv", newline="") as handle:
        header, *rows = list(csv.reader(handle))
    for row in rows:
        if row[0] in (ACCEPTED, OVERRIDDEN, LEFT) and row[1] > "2025-10-06":  # after the signed weeks
            row[3] = f"{float(row[3]) * 0.6:.1f}"
    with open(folder / "c2.csv", "w", newline="") as handle:
        csv.writer(handle).writerows([header, *rows])
    for suffix in (".json", ".parquet"):
        assert main(["fit", str(folder / "c2.csv"), *FIT, "-o", str(folder / f"r2{suffix}"), "--ledger",
                     str(book)]) == 0
    assert {product for product, codes in export_flags(book, folder / "r2.json").items() if "shifted" in codes} \
        == {ACCEPTED, OVERRIDDEN, LEFT}
    return book


def decide_again(folder: Path, book: Path) -> None:
    """As the screen on ``r2.json`` records them: ``ACCEPTED`` accepted with a note, ``OVERRIDDEN`` overridden."""
    from fitcore.results.source import source_from_results
    from tui.factory import open_session
    session = open_session(source_from_results(folder / "r2.json"), book, ANA)
    for product in (ACCEPTED, OVERRIDDEN):
        s = int(session.keys.indices_of([{"product": product}])[0])
        shown = session.look(s)
        assert "shifted" in shown.flags
        if product == ACCEPTED:
            session.decide(shown, "accept", note="demand dropped: checked with the buyer")
        else:
            other = next(name for name in session.results.names if name != shown.proposed)
            session.decide(shown, "override", model=other, note="the other shape for now")


def export_flags(book: Path, results: Path) -> dict[str, list[str]]:
    """Each product's ``flags`` codes in ``ledger export``."""
    out = io.StringIO()
    with redirect_stdout(out):
        assert main(["ledger", "export", str(book), "--results", str(results), "-o", "-", "-q"]) == 0
    return {row["product"]: row["flags"].split() for row in csv.DictReader(io.StringIO(out.getvalue()))}


@pytest.fixture(scope="module")
def decided(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("redecided")
    decide_again(folder, second_cycle_shifted(folder))
    return folder


@pytest.mark.parametrize("suffix", [".json", ".parquet"])
def test_the_export_leaves_out_shifted_where_the_decision_tested_no_longer_stands(decided, suffix):
    flags = export_flags(decided / "ledger.jsonl", decided / f"r2{suffix}")
    assert "shifted" not in flags[ACCEPTED] and "shifted" not in flags[OVERRIDDEN]
    assert "shifted" in flags[LEFT]  # nobody decided it again: the backtest tested what stands
    assert flags[ACCEPTED] == [code for code in export_flags_of_fit(decided, suffix, ACCEPTED) if code != "shifted"]


def export_flags_of_fit(folder: Path, suffix: str, product: str) -> list[str]:
    """The results' own flag codes of ``product`` (as the fit wrote them)."""
    from fitcore.results.read import read_results
    _, series = read_results(folder / f"r2{suffix}")
    return [f["code"] for f in next(r for r in series if r["key"]["product"] == product)["flags"]]


@pytest.mark.parametrize("suffix", [".json", ".parquet"])
def test_show_and_the_report_agree_with_the_export(decided, suffix, capsys):
    from fitcore.ledger.replay import replay
    from pricefold.report.command import open_book, read_ledger, with_backtest
    book, results = decided / "ledger.jsonl", decided / f"r2{suffix}"
    capsys.readouterr()
    for product, shifted in ((ACCEPTED, False), (OVERRIDDEN, False), (LEFT, True)):
        assert main(["show", str(results), "--ledger", str(book), "--product", product]) == 0
        said = capsys.readouterr().out
        assert ("] shifted:" in said) is shifted, said
    # the report: a Parquet file is read as stored, its backtest as the fit wrote it (the trial's JSON refitted)
    report_book, view = open_book(results), read_ledger(book, None)
    diagnosis, backtest = with_backtest(report_book, view, book, replay(list(view.records)))
    flagged = diagnosis.flagged("shifted")
    keys = report_book.results.data
    at = {keys.key_of(s)["product"]: s for s in range(keys.n_series)}
    assert not flagged[at[ACCEPTED]] and not flagged[at[OVERRIDDEN]] and flagged[at[LEFT]]
    assert backtest.record(at[ACCEPTED]) is None and backtest.record(at[LEFT])["shifted"]
