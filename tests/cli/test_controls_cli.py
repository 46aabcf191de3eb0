"""Controls through the command line: ``--control``, ``--season``, the settings file, the plan file's control
columns, the results' fields (JSON, Parquet, stored) and one-line errors, on the invented sample."""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pyarrow.parquet as pq
import pytest

from fitcore.results.read import read_results
from fitcore.results.stored import stored_results
from pricefold.cli import main

SAMPLE = Path(__file__).parents[2] / "sample"


def fit(out: Path, *args) -> int:
    return main(["fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "--date", "week",
                 "--plan", str(SAMPLE / "plan.csv"), "--quiet", "-o", str(out), *args])


@pytest.fixture(scope="module")
def both(tmp_path_factory):
    folder = tmp_path_factory.mktemp("controls")
    assert fit(folder / "plain.json") == 0
    assert fit(folder / "promo.json", "--control", "promo") == 0
    return (json.loads((folder / "plain.json").read_text()), json.loads((folder / "promo.json").read_text()))


def by_key(doc):
    return {(s["key"]["product"], s["key"]["region"]): s for s in doc["series"]}


def codes(series):
    return {f["code"] for f in series["flags"]}


def test_truffle_oil_rises_with_price_until_promotions_are_held_fixed(both):
    plain, promo = map(by_key, both)
    for region in ("North", "East", "South"):
        before, after = plain[("truffle oil 250 ml", region)], promo[("truffle oil 250 ml", region)]
        assert "rising" in codes(before) and "controls" not in before["candidates"][0]
        assert not codes(after) & {"rising", "below-zero", "weak-fit"}
        assert after["plan"]["elasticity"] < -0.5 and after["score"] > before["score"]
        chosen = next(c for c in after["candidates"] if c["name"] == after["chosen"])
        assert chosen["controls"]["promo"] < 0  # promotion weeks were the quiet ones
        assert after["control_values"] == {"promo": 0.0} and after["controls_left_out"] == {}


def test_the_curve_is_the_price_part_plus_the_controls_at_their_values(both):
    """The README's formula: volume = Σ coef·priceⁱ + Σ controls·value (ln volume for the log families)."""
    _, promo = both
    assert promo["settings"]["columns"]["controls"] == ["promo"]
    assert promo["settings"]["controls"]["binary"] == ["promo"]
    assert "0 (a 0/1 control)" in promo["settings"]["controls"]["plan_values"]["promo"]
    coffee = by_key(promo)[("ground coffee 250 g", "South")]
    assert coffee["control_values"] == {"promo": 1.0}  # the plan file's promotion week
    checked = 0
    for series in promo["series"]:
        price, values = series["plan"]["price"], series["control_values"]
        for cand in series["candidates"]:
            if not cand["available"]:
                continue
            held = sum(cand["controls"][name] * values[name] for name in cand["controls"])
            if cand["family"] == "poly":
                expected = sum(b * price ** i for i, b in enumerate(cand["coef"])) + held
            else:
                expected = np.exp(cand["coef"][0] + cand["coef"][1] * np.log(price) + held) * cand["smearing"]
            np.testing.assert_allclose(cand["plan_volume"], expected, rtol=1e-8)
            checked += 1
    assert checked > 1000


def test_the_readme_says_what_a_fit_without_controls_records_in_its_settings(both):
    """Trials found "Without controls none of these appear" beside a plain fit's ``'season': 0``."""
    plain, promo = (doc["settings"] for doc in both)
    readme = " ".join((Path(__file__).parents[2] / "README.md").read_text().split())
    assert plain["season"] == 0 and "controls" not in plain and "controls" not in plain["columns"]
    assert promo["columns"]["controls"] == ["promo"] and "controls" in promo
    assert "Without controls none of these appear, the settings' `season` is 0 (every fit records it)" in readme
    example = readme[readme.index('{"schema": "pricefold-results/1", "settings": {'):]
    shown = [name for name in plain if f'"{name}": ' in example[:example.index('"columns"')]]
    assert shown == list(plain)[:list(plain).index("columns")]  # the example's settings, in the fit's order


def test_price_tied_is_raised_on_the_sample_with_controls(both):
    _, promo = both
    tied = [s for s in promo["series"] if "price-tied" in codes(s)]
    assert tied and all(s["price_vif"] > 10 for s in tied)
    assert all("promo" in f["message"] for s in tied for f in s["flags"] if f["code"] == "price-tied")


def test_settings_file_season_and_parquet_round_trip(tmp_path, monkeypatch):
    (tmp_path / "pricefold.toml").write_text('[columns]\ncontrols = ["promo"]\n\n[fit]\nseason = 1\n')
    monkeypatch.chdir(tmp_path)
    out = tmp_path / "r.parquet"
    assert fit(out) == 0
    table = pq.read_table(out)
    meta = json.loads(table.schema.metadata[b"pricefold"])
    assert meta["settings"]["season"] == 1
    assert meta["settings"]["controls"]["terms"] == ["promo", "season_sin1", "season_cos1"]
    assert "average over the year" in meta["settings"]["controls"]["plan_values"]["season"]
    _, series = read_results(out)
    strawberries = next(s for s in series if s["key"] == {"product": "strawberries 400 g", "region": "North"})
    assert set(strawberries["candidates"][0]["controls"]) == {"promo", "season_sin1", "season_cos1"}
    assert strawberries["control_values"]["season_sin1"] == 0.0  # no plan_date: the year's average
    stored, diagnosis = stored_results(out)
    assert stored.controls.names == ("promo", "season_sin1", "season_cos1")
    s = series.index(strawberries)
    c = stored.names.index(strawberries["chosen"])
    np.testing.assert_allclose(stored.controls.coef[s, c], list(strawberries["candidates"][c]["controls"].values()),
                               rtol=1e-12)
    assert stored.power_coef(s, c) == pytest.approx(strawberries["candidates"][c]["coef"], rel=1e-12)


@pytest.mark.parametrize("args, expected", [
    (["--season", "1", "--date", ""], "needs the date column"),
    (["--control", "rival"], "expected a column 'rival'"),
    (["--control", "price"], "--control price is already the price column"),
    (["--season", "5"], "--season to be a whole number from 0 to 4"),
])
def test_bad_options_fail_in_one_line(tmp_path, capsys, args, expected):
    argv = ["fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "--date", "week", "-o",
            str(tmp_path / "r.json"), "--quiet", *args]
    if "" in args:
        argv = [a for a in argv if a not in ("--date", "week", "")]
    assert main(argv) == 2
    err = capsys.readouterr().err.strip()
    assert expected in err and "\n" not in err and "Traceback" not in err


def test_unreadable_control_cells_are_rejected_and_plan_cells_refused(tmp_path, capsys):
    data = tmp_path / "d.csv"
    lines = (SAMPLE / "wholesale.csv").read_text().splitlines()
    lines[5] = lines[5].rsplit(",", 1)[0] + ",yes"
    lines[9] = lines[9].rsplit(",", 1)[0] + ","
    data.write_text("\n".join(lines) + "\n")
    out = tmp_path / "r.json"
    assert main(["fit", str(data), "--segment", "region", "--control", "promo", "-o", str(out)]) == 0
    err = capsys.readouterr().err
    assert "1 non-numeric promo" in err and "1 missing promo" in err
    plan = tmp_path / "plan.csv"
    plan.write_text("product,region,plan_price,promo\napples 1 kg,North,2.2,often\n")
    assert main(["fit", str(data), "--segment", "region", "--control", "promo", "--plan", str(plan), "-o",
                 str(tmp_path / "r2.json")]) == 2
    err = capsys.readouterr().err
    assert "plan.csv" in err and "line 2" in err and "promo" in err and "expected a number" in err
