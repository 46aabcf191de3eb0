"""A plan price among a series' rows of weight 0 only is an extrapolation, on every page that shows it.

The results' ``price_range`` (JSON and Parquet), ``outside-range``, the plan's ``inside_range``, the
export's ``inside_range``, ``show`` and the report: the range is that of the rows of positive weight
(computed here with numpy from the CSV itself), and the row count says how many rows weigh 0.  Data
invented here: a falling line, its rows of weight 0 priced on both sides of the others.
"""
from __future__ import annotations

import csv
import json

import numpy as np
import pytest

from fitcore import ledger
from fitcore.results.stored import stored_results
from pricefold.cli import main

ZERO_PRICES = (1.5, 3.2, 3.4, 3.6)  # the rows of weight 0 of "beyond"


@pytest.fixture(scope="module")
def made(tmp_path_factory):
    folder = tmp_path_factory.mktemp("zeros")
    rng = np.random.default_rng(37)
    rows = ["product,price,volume,w"]
    for name, zero in (("beyond", ZERO_PRICES), ("within", (2.2, 2.5, 2.8))):
        price = np.concatenate([np.round(rng.uniform(2.0, 3.0, 40), 2), zero])
        weight = np.concatenate([np.round(rng.uniform(0.5, 2.0, 40), 2), np.zeros(len(zero))])
        volume = 1000 - 200 * price + rng.normal(0, 10, len(price))
        rows += [f"{name},{p},{v:.1f},{w}" for p, v, w in zip(price, volume, weight)]
    data = folder / "data.csv"
    data.write_text("\n".join(rows) + "\n")
    (folder / "plan.csv").write_text("product,plan_price\nbeyond,3.4\nwithin,2.5\n")
    out = {}
    for suffix in ("json", "parquet"):
        out[suffix] = folder / f"results.{suffix}"
        assert main(["fit", str(data), "--weight", "w", "--plan", str(folder / "plan.csv"), "-o", str(out[suffix]),
                     "--quiet"]) == 0
    document = json.loads(out["json"].read_text())
    entries = [ledger.Entry(series=r["key"], action="hold", fingerprint=r["fingerprint"],
                            results=ledger.results_digest(document), note="look again") for r in document["series"]]
    ledger.append(folder / "ledger.jsonl", entries, ledger.Identity("ana", "ana", "h"))
    return folder, out


def observed(folder, product):
    """(lowest, highest) price of the product's rows of positive weight, and its rows of weight 0, by numpy."""
    with open(folder / "data.csv", newline="") as handle:
        rows = [r for r in csv.DictReader(handle) if r["product"] == product]
    price, weight = (np.array([float(r[k]) for r in rows]) for k in ("price", "w"))
    return float(np.min(price[weight > 0])), float(np.max(price[weight > 0])), int(np.sum(weight == 0)), len(rows)


def test_the_results_give_the_range_of_positive_weight_and_flag_the_extrapolation(made):
    folder, out = made
    series = {r["key"]["product"]: r for r in json.loads(out["json"].read_text())["series"]}
    lo, hi, zero, n = observed(folder, "beyond")
    assert lo < 3.4 < max(ZERO_PRICES) and hi < 3.4  # the plan price: among rows of weight 0 only
    beyond = series["beyond"]
    assert beyond["price_range"] == [lo, hi] and beyond["n"] == n and beyond["n_weight_0"] == zero == 4
    assert beyond["plan"]["inside_range"] is False
    assert "outside-range" in [f["code"] for f in beyond["flags"]]
    within = series["within"]
    assert within["plan"]["inside_range"] is True and within["n_weight_0"] == 3
    assert "outside-range" not in [f["code"] for f in within["flags"]]
    results, diagnosis = stored_results(out["parquet"])
    s = [results.data.key_of(i)["product"] for i in range(results.n_series)].index("beyond")
    assert (results.price_lo[s], results.price_hi[s]) == (lo, hi) and results.weight_0[s] == 4
    assert diagnosis.flagged("outside-range")[s]


def test_an_unweighted_fit_says_nothing_of_weight_0(made, tmp_path):
    folder, _ = made
    for suffix in ("json", "parquet"):
        path = tmp_path / f"plain.{suffix}"
        assert main(["fit", str(folder / "data.csv"), "-o", str(path), "--quiet"]) == 0
    assert all("n_weight_0" not in r for r in json.loads((tmp_path / "plain.json").read_text())["series"])
    assert stored_results(tmp_path / "plain.parquet")[0].weight_0 is None


@pytest.mark.parametrize("kind", ["json", "parquet"])
def test_show_says_the_range_of_positive_weight_and_the_rows_of_weight_0(made, kind, capsys):
    folder, out = made
    lo, hi, zero, n = observed(folder, "beyond")
    capsys.readouterr()
    assert main(["show", str(out[kind]), "--product", "beyond"]) == 0
    text = capsys.readouterr().out
    assert text.startswith(f"beyond — {n} observations ({zero} of weight 0), prices {lo:.2f}–{hi:.2f}\n")
    assert "outside the observed prices: an extrapolation" in text


def test_the_export_and_the_report_say_outside_the_range(made):
    folder, out = made
    lo, hi, zero, n = observed(folder, "beyond")
    for kind, path in out.items():
        export = folder / f"export_{kind}.csv"
        assert main(["ledger", "export", str(folder / "ledger.jsonl"), "--results", str(path), "-o", str(export),
                     "-q"]) == 0
        with open(export, newline="", encoding="utf-8") as handle:
            rows = {r["product"]: r for r in csv.DictReader(handle)}
        assert rows["beyond"]["inside_range"] == "false" and "outside-range" in rows["beyond"]["flags"].split()
        assert rows["within"]["inside_range"] == "true"
        page = folder / f"report_{kind}.html"
        assert main(["report", str(path), "--ledger", str(folder / "ledger.jsonl"), "-o", str(page)]) == 0
        html = page.read_text()
        assert f"{n} observations ({zero} of weight 0) · prices {lo:.2f}–{hi:.2f}" in html
        assert "outside the observed prices: an extrapolation" in html
        if kind == "json":  # its data refitted: the chart draws the rows of weight 0 apart, and keys them
            assert "<span class=\"swatch zero\"></span>rows of weight 0 (not observations)" in html
