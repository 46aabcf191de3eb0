"""``ledger export`` writes what was signed, or refuses: a row whose standing decision carries a ``signed``
snapshot gets the signed curve, and results that disagree with it stop the export in one line.

The cycle is ``tests/cli/test_series_columns.py``'s (the bundled invented sample, a ledger of accepts, overrides,
holds and carries, a second cycle on three more weeks): against the second cycle's results the carried series
stand ``accepted`` on the very data their carry signed.  A user edited a copy of a results file so that one such
series' plan volume read 9999 and its ``coef[0]`` 1000 higher; the export wrote both (exit 0).  The numbers
are checked against an outside computation: statsmodels' OLS of volume on powers of price (polynomials) or of
ln volume on [1, ln price] with Duan's smearing (log-log), on the series' rows read with pandas, and its
prediction interval for a new observation (``get_prediction(...).summary_frame(alpha=0.05)``, ``obs_ci_*``),
the same t-interval the README states.
"""
from __future__ import annotations

import csv
import io
import json
import shutil

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from fitcore import ledger
from pricefold.cli import main
from tests.cli.test_series_columns import PLAN, _damaged, _export, cycle  # noqa: F401 (cycle: a fixture)

OTHER_PRICE = 2.5  # a plan price for every series, where the sample's plan file prices each one (2.2–2.7 or so)


def _rows(data: bytes) -> dict:
    return {(r["product"], r["region"]): r for r in csv.DictReader(io.StringIO(data.decode("utf-8"), newline=""))}


def _standing(book) -> dict:
    """Each series' standing record (key tuple → record), replayed by the ledger's own reader."""
    out = {}
    for history in ledger.Ledger(book).histories.values():
        current = history.current
        if current is not None:
            out[(current["series"]["product"], current["series"]["region"])] = current
    return out


def _ols(frame: pd.DataFrame, key: tuple, family: str, degree: int, price: float) -> tuple[float, float, float, float]:
    """(volume, lo, hi, elasticity) at ``price`` from statsmodels' OLS on the series' rows (95% interval for a
    new observation; log-log: Duan's smearing on the volume, the interval's bounds exponentiated: a quantile of
    ln volume is one of volume; smearing moves the mean, not the quantiles)."""
    rows = frame[(frame["product"] == key[0]) & (frame["region"] == key[1])]
    p, v = rows["price"].to_numpy(float), rows["volume"].to_numpy(float)
    if family == "poly":
        fit = sm.OLS(v, np.vander(p, degree + 1, increasing=True)).fit()
        at = fit.get_prediction(np.vander([price], degree + 1, increasing=True)).summary_frame(alpha=0.05)
        volume = float(at["mean"].iloc[0])
        slope = sum(i * fit.params[i] * price ** (i - 1) for i in range(1, degree + 1))
        return volume, float(at["obs_ci_lower"].iloc[0]), float(at["obs_ci_upper"].iloc[0]), slope * price / volume
    fit = sm.OLS(np.log(v), sm.add_constant(np.log(p))).fit()
    smear = float(np.mean(np.exp(fit.resid)))
    at = fit.get_prediction(np.array([[1.0, np.log(price)]])).summary_frame(alpha=0.05)
    return (float(np.exp(at["mean"].iloc[0])) * smear, float(np.exp(at["obs_ci_lower"].iloc[0])),
            float(np.exp(at["obs_ci_upper"].iloc[0])), float(fit.params[1]))


def _degree(model: str) -> int:
    return int(model[4:]) if model.startswith("poly") else 1


def _a_signed_current_series(rows: dict, standing: dict, family: str) -> tuple:
    return next(key for key, row in rows.items() if row["status"] == "accepted" and row["family"] == family
                and (standing[key].get("signed") or {}).get("plan"))


def _refused(capsys, results, book, out) -> str:
    code = main(["ledger", "export", str(book), "--results", str(results), "-o", str(out)])
    err = capsys.readouterr().err
    assert code == 2 and not out.exists()  # nothing written
    assert len(err.strip().splitlines()) == 1, err
    return err


def _edited_json(source, target, key, change):
    document = json.loads(source.read_text())
    series = next(s for s in document["series"] if (s["key"]["product"], s["key"]["region"]) == key)
    change(series)
    target.write_text(json.dumps(document))
    return target


def test_an_edited_plan_volume_or_coef_is_refused_naming_both_values(cycle, tmp_path, capsys):  # noqa: F811
    _, second, book = cycle
    rows, standing = _rows(_export(second["json"], book, tmp_path / "clean.csv")), _standing(book)
    capsys.readouterr()
    key = _a_signed_current_series(rows, standing, "poly")
    signed = standing[key]["signed"]
    model = standing[key]["model"]

    def volume(series):  # the trial's edit: the plan volume reads 9999, in the plan and in the candidate
        series["plan"]["volume"] = 9999.0
        next(c for c in series["candidates"] if c["name"] == model)["plan_volume"] = 9999.0

    err = _refused(capsys, _edited_json(second["json"], tmp_path / "v.json", key, volume), book, tmp_path / "v.csv")
    assert str(tmp_path / "v.json") in err and f"product={key[0]}, region={key[1]}" in err
    assert "plan_volume is 9999.0 in the results" in err and f"but {signed['plan']['volume']!r} as signed" in err

    def coef(series):
        next(c for c in series["candidates"] if c["name"] == model)["coef"][0] += 1000

    err = _refused(capsys, _edited_json(second["json"], tmp_path / "c.json", key, coef), book, tmp_path / "c.csv")
    assert f"coef[0] is {signed['coef'][0] + 1000!r} in the results but {signed['coef'][0]!r} as signed" in err

    # the same edit of a Parquet copy (its page checksums made afresh): refused with the same line
    document = json.loads(second["json"].read_text())
    s = next(i for i, r in enumerate(document["series"]) if (r["key"]["product"], r["key"]["region"]) == key)
    c = next(i for i, r in enumerate(document["series"][s]["candidates"]) if r["name"] == model)

    def parquet_volume(columns):
        columns["plan_volume"][s * 7 + c] = 9999.0
    edited = _damaged(second["parquet"], tmp_path / "v.parquet", parquet_volume)
    err = _refused(capsys, edited, book, tmp_path / "vp.csv")
    assert "plan_volume is 9999.0 in the results" in err and f"product={key[0]}, region={key[1]}" in err


def test_signed_rows_carry_the_signed_numbers_and_elasticity(cycle, tmp_path):  # noqa: F811
    _, second, book = cycle
    later = pd.read_csv(second["json"].parent / "later.csv")
    standing = _standing(book)
    made = {kind: _export(second[kind], book, tmp_path / f"{kind}.csv") for kind in ("json", "parquet", "folder")}
    assert made["parquet"] == made["json"] == made["folder"]
    rows = _rows(made["json"])
    header = made["json"].split(b"\r\n", 1)[0].decode().split(",")
    assert header[header.index("plan_hi") + 1] == "plan_elasticity"
    checked: dict = {}
    for key, row in rows.items():
        signed = (standing.get(key) or {}).get("signed")
        if not signed or not signed.get("plan") or row["status"] not in ("accepted", "overridden", "stale"):
            continue
        plan = signed["plan"]
        assert (json.loads(row["coef"]), row["family"]) == (signed["coef"], signed["family"])
        assert [float(row[c]) for c in ("plan_price", "plan_volume", "plan_lo", "plan_hi", "plan_elasticity")] == \
            [plan["price"], plan["volume"], plan["lo"], plan["hi"], plan["elasticity"]]
        if row["status"] == "accepted" and len(checked.get(row["family"], ())) < 5:  # signed on these rows
            outside = _ols(later, key, row["family"], _degree(row["model"]), plan["price"])
            assert [float(row[c]) for c in ("plan_volume", "plan_lo", "plan_hi", "plan_elasticity")] == \
                pytest.approx(outside, rel=1e-8)  # statsmodels OLS (see the module's docstring)
            checked.setdefault(row["family"], []).append(key)
    assert len(checked.get("poly", ())) == 5 and len(checked.get("loglog", ())) == 5, checked
    # pending rows keep the results' numbers, elasticity included (the proposal's, from the plan)
    document = {(s["key"]["product"], s["key"]["region"]): s for s in json.loads(second["json"].read_text())["series"]}
    pending = [key for key, row in rows.items() if row["status"] == "pending" and row["plan_volume"]]
    assert pending
    for key in pending:  # (a flat curve's is left empty: its 0 measures nothing)
        expected = "" if rows[key]["model"] == "poly0" else document[key]["plan"]["elasticity"]
        assert (float(rows[key]["plan_elasticity"]) if rows[key]["plan_elasticity"] else "") == expected
    assert any(rows[key]["model"] != "poly0" for key in pending)


@pytest.fixture(scope="module")
def repriced(cycle, tmp_path_factory):  # noqa: F811
    """The second cycle's data fitted again with one plan price for every series (the same data: the carried
    decisions still stand on them), as JSON and Parquet."""
    _, second, book = cycle
    work = tmp_path_factory.mktemp("repriced")
    runs = {kind: work / f"r.{kind}" for kind in ("json", "parquet")}
    settings = [arg for arg in PLAN if arg != "--plan" and not arg.endswith("plan.csv")]
    for path in runs.values():
        assert main(["fit", str(second["json"].parent / "later.csv"), *settings, "--plan-price", str(OTHER_PRICE),
                     "--ledger", str(book), "-o", str(path), "-q"]) == 0
    return runs, book


def test_another_plan_price_on_the_same_data_gives_the_signed_curve_there(cycle, repriced, tmp_path,
                                                                        capsys):  # noqa: F811
    runs, book = repriced
    later = pd.read_csv(cycle[1]["json"].parent / "later.csv")
    standing = _standing(book)
    made = {kind: _export(runs[kind], book, tmp_path / f"{kind}.csv") for kind in runs}
    assert made["parquet"] == made["json"]
    rows = _rows(made["json"])
    checked = {"poly": 0, "loglog": 0}
    for key, row in rows.items():
        signed = (standing.get(key) or {}).get("signed")
        if row["status"] != "accepted" or not signed or not signed.get("plan") or signed["plan"]["price"] == OTHER_PRICE:
            continue
        assert float(row["plan_price"]) == OTHER_PRICE
        assert json.loads(row["coef"]) == signed["coef"]
        if checked[row["family"]] < 5:
            outside = _ols(later, key, row["family"], _degree(row["model"]), OTHER_PRICE)
            assert [float(row[c]) for c in ("plan_volume", "plan_lo", "plan_hi", "plan_elasticity")] == \
                pytest.approx(outside, rel=1e-8)  # statsmodels OLS at the new price
            checked[row["family"]] += 1
    assert checked == {"poly": 5, "loglog": 5}
    capsys.readouterr()
    # an edited plan volume at the new price disagrees with the signed curve there: refused
    key = _a_signed_current_series(rows, standing, "loglog")
    model = standing[key]["model"]

    def volume(series):
        next(c for c in series["candidates"] if c["name"] == model)["plan_volume"] = 9999.0
        if series["chosen"] == model:
            series["plan"]["volume"] = 9999.0
    edited = _edited_json(runs["json"], tmp_path / "v.json", key, volume)
    err = _refused(capsys, edited, book, tmp_path / "v.csv")
    assert f"product={key[0]}, region={key[1]}" in err and "plan_volume is 9999.0 in the results" in err
    assert f"on the curve signed (at plan price {OTHER_PRICE!r})" in err


def test_no_elasticity_where_the_volume_is_not_above_zero(tmp_path):
    """A falling line planned far past its zero: the volume there is below zero and the elasticity empty, as
    the screen's "n/a" (the results hold none either: -b·p/(a - b·p) would be meaningless)."""
    rng = np.random.default_rng(5)
    price = np.tile([1.0, 1.5, 2.0, 2.5, 3.0], 4)
    volume = 100 - 30 * price + rng.normal(0, 1, price.size)
    data = tmp_path / "line.csv"
    pd.DataFrame({"product": "falling", "price": price, "volume": volume}).to_csv(data, index=False)
    results = tmp_path / "line.json"
    assert main(["fit", str(data), "--plan-price", "5", "-o", str(results), "-q"]) == 0
    book = tmp_path / "ledger.jsonl"
    book.write_text("")
    row = next(iter(csv.DictReader(io.StringIO(_export(results, book, tmp_path / "x.csv").decode(), newline=""))))
    fit = sm.OLS(volume, sm.add_constant(price)).fit()  # statsmodels: the line's volume at 5 is below zero
    assert row["status"] == "pending" and row["model"] == "poly1"
    assert float(row["plan_volume"]) == pytest.approx(fit.params[0] + 5 * fit.params[1], rel=1e-9)
    assert float(row["plan_volume"]) < 0
    stored = json.loads(results.read_text())["series"][0]["plan"]["elasticity"]
    assert stored is None and row["plan_elasticity"] == ""


def test_a_decision_without_snapshot_keeps_the_results_numbers(cycle, tmp_path):  # noqa: F811
    """A ``/1``-style accept (no ``signed``) standing on these data: the results' numbers, as before."""
    first, _, _ = cycle
    book = tmp_path / "ledger.jsonl"
    document = json.loads(first["json"].read_text())
    s = next(s for s in document["series"] if s["chosen"] and s["plan"])
    ledger.append(book, [ledger.Entry(series=s["key"], action="accept", fingerprint=s["fingerprint"], results="r",
                                      model=s["chosen"], proposed=s["chosen"])], ledger.Identity("t", "t", "h"))
    copy = shutil.copy(first["json"], tmp_path / "r.json")
    row = _rows(_export(copy, book, tmp_path / "x.csv"))[(s["key"]["product"], s["key"]["region"])]
    assert row["status"] == "accepted"
    assert [float(row[c]) for c in ("plan_volume", "plan_lo", "plan_hi", "plan_elasticity")] == \
        [s["plan"]["volume"], s["plan"]["lo"], s["plan"]["hi"], s["plan"]["elasticity"]]

