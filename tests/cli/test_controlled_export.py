"""The interval a fit with controls signs into the ledger and exports, and what becomes of one signed before
``cov_unscaled`` held the controls at the plan's values.

Reference: statsmodels ``OLS`` of ln volume on [1, price, promo, sin 2πd, cos 2πd] (d the week's day of the
year from 0 over the days in its year) for ground coffee 250 g · South of the sample, and
``get_prediction(...).summary_frame(alpha=0.05)`` ``obs_ci_lower``/``obs_ci_upper`` exponentiated at the
plan's price with promo = 1 (the plan file's) and the season at its average (0, 0): 635.67–843.83.
"""
from __future__ import annotations

import csv
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from fitcore import ledger
from fitcore.ledger.snapshot import from_records
from fitcore.results.control_fields import COV_AT_PLAN
from fitcore.results.read import read_results
from pricefold.cli import main

SAMPLE = Path(__file__).parents[2] / "sample"
COFFEE = {"product": "ground coffee 250 g", "region": "South"}


def fit(out: Path, plan: Path) -> None:
    assert main(["fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "--date", "week", "--plan", str(plan),
                 "-o", str(out), "--fold-order", "given", "--control", "promo", "--season", "1", "--semilog",
                 "--quiet"]) == 0


def coffee_interval(price: float) -> tuple[float, float]:
    """statsmodels' 95% prediction interval of the coffee's semilog curve at ``price``, promo 1, season 0."""
    rows = pd.read_csv(SAMPLE / "wholesale.csv")
    rows = rows[(rows["product"] == COFFEE["product"]) & (rows["region"] == COFFEE["region"])]
    week = pd.to_datetime(rows["week"])
    turn = 2 * np.pi * (week.dt.day_of_year - 1) / np.where(week.dt.is_leap_year, 366, 365)
    design = np.column_stack([np.ones(len(rows)), rows["price"], rows["promo"], np.sin(turn), np.cos(turn)])
    fit = sm.OLS(np.log(rows["volume"].to_numpy(float)), design).fit()
    frame = fit.get_prediction(np.array([[1.0, price, 1.0, 0.0, 0.0]])).summary_frame(alpha=0.05)
    return tuple(np.exp(frame[["obs_ci_lower", "obs_ci_upper"]].to_numpy()[0]))


def export(book: Path, results: Path, out: Path) -> dict[tuple, dict]:
    assert main(["ledger", "export", str(book), "--results", str(results), "-o", str(out), "-q"]) == 0
    with out.open(newline="") as handle:
        return {(r["product"], r["region"]): r for r in csv.DictReader(handle)}


@pytest.fixture(scope="module")
def signed(tmp_path_factory):
    """The sample fitted with a promotion and a season pair at the plan's prices and at 7% above them, and
    its unflagged series accepted from the first."""
    folder = tmp_path_factory.mktemp("controlled")
    fit(folder / "cg.json", SAMPLE / "plan.csv")
    plan = pd.read_csv(SAMPLE / "plan.csv")
    plan["plan_price"] = (plan["plan_price"] * 1.07).round(2)
    plan.to_csv(folder / "plan2.csv", index=False)
    fit(folder / "cg2.json", folder / "plan2.csv")
    assert main(["ledger", "accept-unflagged", str(folder / "cg.json"), "--ledger", str(folder / "cg.jsonl"),
                 "--analyst", "ana", "-q"]) == 0
    return folder


def test_the_export_gives_the_interval_of_the_results_and_of_statsmodels(signed):
    header, records = read_results(signed / "cg.json")
    assert header["settings"]["controls"]["cov_unscaled"] == COV_AT_PLAN
    rows = export(signed / "cg.jsonl", signed / "cg.json", signed / "e.csv")
    accepted = [r for r in rows.values() if r["status"] == "accepted"]
    assert len(accepted) > 100
    for record in records:
        row = rows[(record["key"]["product"], record["key"]["region"])]
        if row["status"] == "accepted":  # what was signed is what the results show
            np.testing.assert_allclose([float(row["plan_lo"]), float(row["plan_hi"])],
                                       [record["plan"]["lo"], record["plan"]["hi"]], rtol=1e-9)
    coffee = rows[tuple(COFFEE.values())]
    assert coffee["status"] == "accepted" and coffee["model"] == "semilog" and coffee["plan_price"] == "3.95"
    np.testing.assert_allclose([float(coffee["plan_lo"]), float(coffee["plan_hi"])], coffee_interval(3.95),
                               rtol=1e-9)


def test_the_export_at_another_plan_price_gives_statsmodels_interval_there(signed):
    rows = export(signed / "cg.jsonl", signed / "cg2.json", signed / "e2.csv")
    coffee = rows[tuple(COFFEE.values())]
    assert coffee["status"] == "accepted" and coffee["plan_price"] == "4.23"
    np.testing.assert_allclose([float(coffee["plan_lo"]), float(coffee["plan_hi"])], coffee_interval(4.23),
                               rtol=1e-9)


def test_results_written_before_the_change_sign_no_interval(signed, tmp_path):
    doc = json.loads((signed / "cg.json").read_text())
    del doc["settings"]["controls"]["cov_unscaled"]  # as every controlled results file was written before
    (tmp_path / "old.json").write_text(json.dumps(doc))
    assert main(["ledger", "accept-unflagged", str(tmp_path / "old.json"), "--ledger", str(tmp_path / "l.jsonl"),
                 "--analyst", "ana", "-q"]) == 0
    snaps = [h.current["signed"] for h in ledger.Ledger(tmp_path / "l.jsonl").histories.values()]
    assert len(snaps) > 100
    for snap in snaps:
        assert snap["cov_unscaled"] is None and "incomplete" in snap and snap["plan"]["lo"] is None
        assert snap["plan"]["volume"] is not None
    row = export(tmp_path / "l.jsonl", tmp_path / "old.json", tmp_path / "e.csv")[tuple(COFFEE.values())]
    assert row["status"] == "accepted" and row["plan_volume"] and row["plan_lo"] == row["plan_hi"] == ""


def test_a_decision_signed_before_the_change_exports_no_interval(signed, tmp_path):
    records = {json.dumps(r["key"]): r for r in read_results(signed / "cg.json")[1]}
    coffee = records[json.dumps(COFFEE)]
    snap = from_records([(coffee, coffee["chosen"])], 0.95, ["promo", "season_sin1", "season_cos1"])[0]
    assert snap.pop("cov_at_plan_controls") is True  # what a snapshot signed before the change holds
    ledger.append(tmp_path / "l.jsonl", [ledger.Entry(
        series=COFFEE, action="accept", fingerprint=coffee["fingerprint"], results="ab" * 32,
        model=coffee["chosen"], proposed=coffee["chosen"], signed=snap)], ledger.Identity("ana", "ana", "host"))
    for results, price in (("cg.json", "3.95"), ("cg2.json", "4.23")):
        row = export(tmp_path / "l.jsonl", signed / results, tmp_path / "e.csv")[tuple(COFFEE.values())]
        assert row["status"] == "accepted" and row["plan_price"] == price and row["plan_volume"]
        assert row["plan_lo"] == row["plan_hi"] == ""
