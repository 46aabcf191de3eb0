"""``ledger export`` of a series signed on other data: the signed model's numbers beside its signature.

The cycle is the invented one of ``tests/cli/test_cycle.py``.  The expected numbers are the ``signed``
snapshot the ledger recorded at sign-off (read back with ``json``), and the ones that must not appear
are this cycle's, from the new results file.
"""
from __future__ import annotations

import csv
import json

import pytest

from fitcore import ledger
from pricefold.cli import main
from tests.cli.test_cycle import fit, write_weeks
from tests.fitcore.ledger_support import ANA, after


def test_a_stale_row_carries_the_signed_model_not_this_cycles(tmp_path):
    book = tmp_path / "ledger.jsonl"
    write_weeks(tmp_path / "c1.csv", 40, seed=9)
    first = fit(tmp_path / "c1.csv", tmp_path / "r1.json")
    # item 7 is signed without a snapshot, as a pricefold-ledger/1 accept was
    bare = first["item 7"]
    ledger.append(book, [ledger.Entry(series=bare["key"], action="accept", fingerprint=bare["fingerprint"],
                                      results="r1", model=bare["chosen"], proposed=bare["chosen"],
                                      flags=[f["code"] for f in bare["flags"]],
                                      supersedes=after(ledger.Ledger(book), "item 7"))], ANA)
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(book), "-q"]) == 0
    write_weeks(tmp_path / "c2.csv", 44, seed=9)
    second = fit(tmp_path / "c2.csv", tmp_path / "r2.json", book)
    out = tmp_path / "x.csv"
    assert main(["ledger", "export", str(book), "--results", str(tmp_path / "r2.json"), "-o", str(out)]) == 0
    rows = {r["product"]: r for r in csv.DictReader(out.open(newline=""))}
    signed = {r["series"]["product"]: r for r in map(json.loads, book.read_text().splitlines())}
    checked = 0
    for product, row in rows.items():
        if row["status"] != "stale" or product == "item 7":
            continue
        snapshot = signed[product]["signed"]
        now = next(c for c in second[product]["candidates"] if c["name"] == row["model"])
        assert json.loads(row["coef"]) == snapshot["coef"] != now["coef"]
        # the signed smearing (a log family's), never this cycle's (the README's reproduction needs it)
        assert row["smearing"] == ("" if snapshot["smearing"] is None else repr(snapshot["smearing"]))
        assert snapshot["smearing"] is None or snapshot["smearing"] != now["smearing"]
        assert float(row["plan_volume"]) == snapshot["plan"]["volume"] != second[product]["plan"]["volume"]
        assert (float(row["plan_lo"]), float(row["plan_hi"])) == (snapshot["plan"]["lo"], snapshot["plan"]["hi"])
        assert float(row["plan_price"]) == snapshot["plan"]["price"]
        assert row["analyst"] == signed[product]["analyst"] and row["at"] == signed[product]["at"]
        checked += 1
    assert checked >= 5  # polynomials here: a stale log-family row in tests/cli/test_export_smearing.py
    bare_row = rows["item 7"]
    assert bare_row["status"] == "stale" and bare_row["model"] == bare["chosen"]
    assert [bare_row[c] for c in ("family", "coef", "smearing", "plan_price", "plan_volume", "plan_lo",
                                  "plan_hi")] == [""] * 7


@pytest.mark.parametrize("ending", [".json", ".parquet"])
def test_an_export_of_last_cycles_results_warns_of_decisions_on_newer_data(tmp_path, capsys, ending):
    """A trial exported cycle 1's results after cycle 2's sign-off: 148 rows 'stale', exit 0, no word that those
    were decided on newer data (``show --ledger`` says so)."""
    book = tmp_path / "ledger.jsonl"
    write_weeks(tmp_path / "c1.csv", 40, seed=9)
    write_weeks(tmp_path / "c2.csv", 44, seed=9)
    for week in ("c1", "c2"):
        assert main(["fit", str(tmp_path / f"{week}.csv"), "--date", "week", "--plan-price", "2.3",
                     "-o", str(tmp_path / f"{week}{ending}"), "-q"]) == 0
    assert main(["ledger", "accept-unflagged", str(tmp_path / f"c2{ending}"), "--ledger", str(book), "-q"]) == 0
    accepted = len(book.read_text().splitlines())
    capsys.readouterr()
    for week, said in (("c1", True), ("c2", False)):
        assert main(["ledger", "export", str(book), "--results", str(tmp_path / f"{week}{ending}"),
                     "-o", str(tmp_path / f"{week}.csv.out.csv"), "-q"]) == 0
        err = capsys.readouterr().err
        assert (f"warning: {accepted} series were decided on newer data than these results" in err) is said, err
        # show's list says it too (each row's due read "decided on newer data", the count nowhere: a trial)
        assert main(["show", str(tmp_path / f"{week}{ending}"), "--ledger", str(book)]) == 0
        err = capsys.readouterr().err
        assert (f"note: {accepted:,} of the series listed were decided on newer data than these results" in err) is said
