"""``ledger export``'s ``smearing`` column: each row's ``plan_volume`` from its own cells, and ``-q``.

A planning system holding only the export must get the plan volume back from ``family``, ``coef``,
``smearing`` and ``plan_price`` as the README says (plain units of price):

    poly      plan_volume = Σ coef[i]·plan_priceⁱ
    loglog    plan_volume = exp(coef[0] + coef[1]·ln plan_price)·smearing
    semilog   plan_volume = exp(coef[0] + coef[1]·plan_price)·smearing

The rows are the bundled invented sample's export (``tests/cli/test_series_columns.py``'s cycle: accepts,
overrides, holds, pending series, then a second cycle fitted on three more weeks, where decisions that were
not carried stand ``stale`` with their signed numbers), and a fit with the semi-log family and overrides to
it.  The smearing factor itself is checked against an outside computation: Duan's smearing estimate
(N. Duan, "Smearing estimate: a nonparametric retransformation method", JASA 78 (1983) 605–610) is the
mean of exp(residual) of the least-squares fit on the log scale, here statsmodels' OLS of ln volume on
[1, ln price] (log-log) or [1, price] (semi-log) over the series' rows read from the CSV with pandas.
"""
from __future__ import annotations

import csv
import io
import json
import math

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from fitcore import ledger
from fitcore.ledger.replay import series_id
from pricefold.cli import main
from tests.cli.test_series_columns import PLAN, SAMPLE, _export, cycle  # noqa: F401 (cycle: a fixture)
from tests.fitcore.ledger_support import ANA

KEY = ("product", "region")


def _rows(data: bytes) -> list[dict]:
    return list(csv.DictReader(io.StringIO(data.decode("utf-8"), newline="")))


def _volume(row: dict) -> float:
    """The README's formula, from the row's cells alone."""
    coef, price = json.loads(row["coef"]), float(row["plan_price"])
    if row["family"] == "poly":
        assert row["smearing"] == ""  # a polynomial has no smearing
        return sum(c * price ** i for i, c in enumerate(coef))
    regressor = {"loglog": math.log(price), "semilog": price}[row["family"]]
    return math.exp(coef[0] + coef[1] * regressor) * float(row["smearing"])


def _recomputed(rows: list[dict]) -> dict:
    """Every row with coefficients and a plan volume recomputed (rel 1e-9); rows counted by (status, family)."""
    seen: dict = {}
    for row in rows:
        if not row["coef"]:
            assert row["smearing"] == "" and row["family"] == ""  # nothing to scale
            continue
        expected = float(row["plan_volume"])
        assert _volume(row) == pytest.approx(expected, rel=1e-9), row
        if row["family"] != "poly":  # without the factor the volume is off, as users found
            unsmeared = expected / float(row["smearing"])
            assert abs(unsmeared / expected - 1) > 1e-4, row
        seen[row["status"], row["family"]] = seen.get((row["status"], row["family"]), 0) + 1
    return seen


@pytest.mark.parametrize("kind", ["json", "parquet"])
def test_plan_volume_comes_back_from_the_exported_cells(cycle, tmp_path, kind):  # noqa: F811
    first, second, book = cycle
    seen = _recomputed(_rows(_export(first[kind], book, tmp_path / "first.csv")))
    later = _recomputed(_rows(_export(second[kind], book, tmp_path / "second.csv")))
    # the ledger is the cycle's last state: against the first results, the carried decisions stand on other
    # data (stale, signed on the second cycle's rows); against the second, the uncarried accepts do
    for counts in (seen, later):
        for family in ("poly", "loglog"):
            assert counts.get(("stale", family), 0) >= 1 and counts.get(("accepted", family), 0) >= 1, counts
            assert counts.get(("pending", family), 0) >= 1, counts
    assert seen.get(("overridden", "poly"), 0) >= 1 and seen.get(("held", "loglog"), 0) >= 1, seen
    assert later.get(("accepted", "loglog"), 0) >= 100, later


def _duan(frame: pd.DataFrame, key: tuple[str, str], regressor: str) -> tuple[float, np.ndarray]:
    """Duan's (1983) smearing factor and the coefficients of statsmodels' OLS of ln volume on [1, x]."""
    rows = frame[(frame["product"] == key[0]) & (frame["region"] == key[1])]
    x = np.log(rows["price"].to_numpy(float)) if regressor == "log" else rows["price"].to_numpy(float)
    fit = sm.OLS(np.log(rows["volume"].to_numpy(float)), sm.add_constant(x)).fit()
    return float(np.mean(np.exp(fit.resid))), np.asarray(fit.params)


def test_log_log_smearing_is_duans_from_statsmodels_ols(cycle, tmp_path):  # noqa: F811
    first, second, book = cycle
    frame = pd.read_csv(SAMPLE / "wholesale.csv")
    later = pd.read_csv(second["json"].parent / "later.csv")
    checked = {"now": 0, "stale": 0}
    for row in _rows(_export(second["json"], book, tmp_path / "second.csv")):
        if row["family"] != "loglog":
            continue
        key = (row["product"], row["region"])
        if row["status"] == "stale":  # signed on the first cycle's rows, and not this cycle's factor
            factor, coef = _duan(frame, key, "log")
            assert float(row["smearing"]) != pytest.approx(_duan(later, key, "log")[0], rel=1e-9)
        else:
            factor, coef = _duan(later, key, "log")
        assert float(row["smearing"]) == pytest.approx(factor, rel=1e-9)  # Duan (1983), via statsmodels OLS
        assert json.loads(row["coef"]) == pytest.approx(coef.tolist(), rel=1e-9)
        checked["stale" if row["status"] == "stale" else "now"] += 1
    assert checked["now"] >= 10 and checked["stale"] >= 1, checked


@pytest.fixture(scope="module")
def semilog(tmp_path_factory):
    """The sample fitted with the semi-log family (JSON and Parquet), unflagged series accepted and a few
    series overridden to their semi-log curve."""
    work = tmp_path_factory.mktemp("semilog")
    book = work / "ledger.jsonl"
    runs = {kind: work / f"r.{kind}" for kind in ("json", "parquet")}
    for path in runs.values():
        assert main(["fit", str(SAMPLE / "wholesale.csv"), *PLAN, "--semilog", "-o", str(path), "-q"]) == 0
    assert main(["ledger", "accept-unflagged", str(runs["json"]), "--ledger", str(book), "-q"]) == 0
    document = json.loads(runs["json"].read_text())
    decided = set(ledger.Ledger(book).histories)  # series ids with a decision
    entries = []
    for s in document["series"]:
        semi = next(c for c in s["candidates"] if c["family"] == "semilog")
        if len(entries) < 6 and semi["available"] and s["chosen"] != semi["name"] and \
                series_id(s["key"]) not in decided:
            entries.append(ledger.Entry(series=s["key"], action="override", fingerprint=s["fingerprint"],
                                        results=ledger.results_digest(document), model=semi["name"],
                                        proposed=s["chosen"], note="semi-log reads better",
                                        flags=[f["code"] for f in s["flags"]]))
    ledger.append(book, entries, ANA)
    return runs, book


def test_semilog_rows_come_back_and_their_smearing_is_duans(semilog, tmp_path):
    runs, book = semilog
    made = {kind: _export(runs[kind], book, tmp_path / f"{kind}.csv") for kind in runs}
    assert made["parquet"] == made["json"]
    rows = _rows(made["json"])
    seen = _recomputed(rows)
    assert seen.get(("overridden", "semilog"), 0) >= 3, seen
    frame = pd.read_csv(SAMPLE / "wholesale.csv")
    for row in (r for r in rows if r["family"] == "semilog"):
        factor, coef = _duan(frame, (row["product"], row["region"]), "price")
        assert float(row["smearing"]) == pytest.approx(factor, rel=1e-9)  # Duan (1983), via statsmodels OLS
        assert json.loads(row["coef"]) == pytest.approx(coef.tolist(), rel=1e-9)


@pytest.mark.parametrize("run", [0, 1], ids=["first", "second"])
def test_both_readers_write_the_same_smearing_column(cycle, tmp_path, run):  # noqa: F811
    runs, book = cycle[run], cycle[2]
    made = {kind: _export(runs[kind], book, tmp_path / f"{kind}.csv") for kind in runs}
    assert made["parquet"] == made["json"] and made["folder"] == made["json"]
    header = made["json"].split(b"\r\n", 1)[0].decode().split(",")
    assert header[header.index("coef") + 1] == "smearing"
    rows = _rows(made["json"])
    assert sum(row["smearing"] != "" for row in rows) >= 10  # the column is read, not empty on both paths
    assert all((row["smearing"] != "") == (row["family"] in ("loglog", "semilog")) for row in rows)


def test_quiet_silences_the_count_line_only(cycle, tmp_path, capsys):  # noqa: F811
    first, _, book = cycle
    loud = _export(first["json"], book, tmp_path / "loud.csv")
    err = capsys.readouterr().err.splitlines()
    # the first cycle's results, read with the ledger after the second: a warning (kept with -q), then the count
    newer = [line for line in err if "were decided on newer data than these results" in line]
    assert len(newer) == 1 and err[-1:] == [f"180 series written to {tmp_path / 'loud.csv'} "
                                            f"(ledger head {ledger.Ledger(book).head_text})"] and len(err) == 2
    for flag in ("-q", "--quiet"):
        assert _export(first["json"], book, tmp_path / f"quiet{flag}.csv", flag) == loud
        assert capsys.readouterr() == ("", newer[0] + "\n")
