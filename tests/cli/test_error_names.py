"""Errors naming a user's value show it as the screen does (``fitcore.text.clean``), not as a Python ``repr``:
a plan key held ``product='nosuch\\u202eevil\\n2'``, backslash escapes nobody reads in the data or on screen."""
from __future__ import annotations

from pathlib import Path

from pricefold.cli import main

SAMPLE = Path(__file__).resolve().parents[2] / "sample"


def fit_line(tmp_path, capsys, *args) -> str:
    capsys.readouterr()
    assert main(["fit", *args, "-q", "-o", str(tmp_path / "out.json")]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and not (tmp_path / "out.json").exists()
    return err


def test_a_plan_key_no_series_has(tmp_path, capsys):
    plan = tmp_path / "plan.csv"
    plan.write_text('product,region,plan_price\n"nosuch\u202eevil\n2",East,2.0\n', encoding="utf-8")
    err = fit_line(tmp_path, capsys, str(SAMPLE / "wholesale.csv"), "--segment", "region", "--plan", str(plan))
    assert err.endswith("line 2, column 'product': no series in the data has this key "
                        "(product='nosuch⟨U+202E⟩evil␊2', region='East'); its product holds a line break (a quote "
                        "that closes on a later line than it opens)"), err


def test_a_plan_price_cell_and_a_missing_column(tmp_path, capsys):
    plan = tmp_path / "plan.csv"
    plan.write_text('product,region,plan_price\nlemons 500 g,East,"2\u202e,5"\n', encoding="utf-8")
    err = fit_line(tmp_path, capsys, str(SAMPLE / "wholesale.csv"), "--segment", "region", "--plan", str(plan))
    assert err.endswith("column 'plan_price': expected a price above zero, found '2⟨U+202E⟩,5'"), err
    data = tmp_path / "data.csv"
    data.write_text("pro\u202educt,region,price,volume\na,b,1,2\n", encoding="utf-8")
    err = fit_line(tmp_path, capsys, str(data), "--segment", "region")
    assert err.endswith("expected a column 'product', found 'pro⟨U+202E⟩duct', 'region', 'price', 'volume'; "
                        "did you mean 'pro⟨U+202E⟩duct'?"), err
