"""A series with no model (three rows: ``few-points``, nothing proposed) whose plan file prices it: ``show`` (in full,
its plan line) and ``ledger export`` give the plan price the plan file set, as the report does — with no volume,
interval or elasticity, which no curve predicts.  A trial: the report showed 5.00, ``show`` had no plan line and the
export's ``plan_price`` was empty (JSON results held no plan for it; the Parquet export read it only from a chosen
row)."""
from __future__ import annotations

import csv
import io
from contextlib import redirect_stdout

import pytest

from fitcore import ledger
from pricefold.cli import main
from tests.fitcore.ledger_support import ANA

FEW = {"product": "honey 250 g", "region": "York"}
PLANNED = "5.00"  # the plan file's price for it


@pytest.fixture(scope="module")
def fitted(tmp_path_factory):
    folder = tmp_path_factory.mktemp("no_model")
    rows = [["product", "region", "price", "volume"]]
    for i in range(30):  # a series with a model beside it
        price = 2.0 + 0.03 * i
        rows.append(["oats 500 g", "York", f"{price:.2f}", f"{500 - 100 * price + (-1) ** i * 4:.1f}"])
    rows += [["honey 250 g", "York", price, volume] for price, volume in (("4.50", "120"), ("5.00", "100"),
                                                                          ("5.50", "85"))]
    with open(folder / "data.csv", "w", newline="") as handle:
        csv.writer(handle).writerows(rows)
    with open(folder / "plan.csv", "w", newline="") as handle:
        csv.writer(handle).writerows([["product", "region", "plan_price"], ["oats 500 g", "York", "2.40"],
                                      ["honey 250 g", "York", PLANNED]])
    for suffix in (".json", ".parquet"):
        assert main(["fit", str(folder / "data.csv"), "--segment", "region", "--plan", str(folder / "plan.csv"),
                     "-o", str(folder / f"r{suffix}"), "--quiet"]) == 0
    return folder


def export_row(book, results) -> dict:
    out = io.StringIO()
    with redirect_stdout(out):
        assert main(["ledger", "export", str(book), "--results", str(results), "-o", "-", "-q"]) == 0
    return next(row for row in csv.DictReader(io.StringIO(out.getvalue())) if row["product"] == FEW["product"])


@pytest.mark.parametrize("suffix", [".json", ".parquet"])
def test_show_gives_a_no_model_series_its_plan_price(fitted, suffix, capsys):
    capsys.readouterr()
    assert main(["show", str(fitted / f"r{suffix}"), "--product", FEW["product"]]) == 0
    said = capsys.readouterr().out
    assert "chosen: none" in said and "few-points" in said
    assert f"plan price {PLANNED}: no model, so no volume predicted there" in said.splitlines()


@pytest.mark.parametrize("suffix", [".json", ".parquet"])
def test_the_export_gives_a_no_model_series_its_plan_price_pending_and_held(fitted, tmp_path, suffix):
    book = tmp_path / "ledger.jsonl"
    assert main(["ledger", "accept-unflagged", str(fitted / f"r{suffix}"), "--ledger", str(book), "-q"]) == 0
    row = export_row(book, fitted / f"r{suffix}")
    assert row["status"] == "pending" and row["model"] == ""
    assert float(row["plan_price"]) == float(PLANNED)
    assert [row[name] for name in ("plan_volume", "plan_lo", "plan_hi", "plan_elasticity", "coef")] == [""] * 5
    assert row["inside_range"] == "true"  # 5.00 among its prices 4.50–5.50
    from fitcore.results.read import read_results
    record = next(r for r in read_results(fitted / f"r{suffix}")[1] if r["key"] == FEW)
    ledger.append(book, [ledger.Entry(series=FEW, action="hold", fingerprint=record["fingerprint"], results="r",
                                      note="three weeks only", flags=[f["code"] for f in record["flags"]],
                                      supersedes=None)], ANA)  # its first record (accept-unflagged passed it by)
    held = export_row(book, fitted / f"r{suffix}")
    assert held["status"] == "held" and float(held["plan_price"]) == float(PLANNED) and held["plan_volume"] == ""
