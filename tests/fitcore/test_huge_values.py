"""Values too large for the arithmetic: rejected at the row, flagged when they reach a fit, never a crash.

The bound 1e15 is the README's; the overflow it guards against is IEEE 754 double precision's (largest
finite value about 1.8e308, so a square overflows past about 1.3e154: Python's ``sys.float_info.max``).
Inputs are small and invented.
"""
from __future__ import annotations

import json

import numpy as np
import pytest

import fitcore
from fitcore.data.loader import Columns, load_with_rejects
from fitcore.review.flags import diagnose
from fitcore.results.write import write_results
from pricefold.cli import main
from tui.widgets.charts import curve_chart, fold_chart


def written(tmp_path, last_row: str, header: str = "product,price,volume,promo") -> object:
    rows = [header] + [f"a,{1 + 0.1 * i:.1f},{100 - 5 * i},{i % 2}" for i in range(14)] + [last_row]
    path = tmp_path / "d.csv"
    path.write_text("\n".join(rows) + "\n")
    return path


@pytest.mark.parametrize("row, reason", [
    ("a,1e200,1e200,0", "price beyond ±1e15"),
    ("a,1e308,5,0", "price beyond ±1e15"),
    ("a,2,1.0000001e15,0", "volume beyond ±1e15"),
    ("a,2,5,-2e15", "promo beyond ±1e15"),  # controls may be negative, not huge
])
def test_a_value_beyond_the_bound_is_a_rejected_row_with_its_reason(tmp_path, row, reason):
    path = written(tmp_path, row)
    data, rejects = load_with_rejects(path, Columns(controls=("promo",)))
    assert rejects.lines.tolist() == [16] and rejects.reasons == [reason]
    assert len(data.price) == 14


def test_the_bound_itself_is_accepted(tmp_path):
    data, rejects = load_with_rejects(written(tmp_path, "a,1e15,1e15,0"), Columns(controls=("promo",)))
    assert len(rejects) == 0 and data.price.max() == 1e15


@pytest.fixture(scope="module")
def overflowing():
    """One series whose volume squared overflows (1e200² > 1.8e308), one ordinary series."""
    price = np.r_[np.linspace(1, 3, 14), np.linspace(1, 3, 14)]
    volume = 100 - 20 * price
    volume[13] = 1e200
    keys = {"product": np.array(["huge"] * 14 + ["fine"] * 14, dtype=object)}
    results = fitcore.fit_batch(fitcore.from_columns(keys, price, volume), plan_price=2.0)
    s = list(results.data.keys["product"]).index("huge")
    return results, s


def test_a_series_left_without_a_model_is_flagged_with_a_reason_and_comes_first(overflowing):
    results, s = overflowing
    diagnosis = diagnose(results)
    assert results.chosen[s] == -1
    flags = diagnosis.flags_of(s)
    assert [f["code"] for f in flags] == ["no-model"] and flags[0]["severity"] == "stop"
    assert "its held-out errors overflow" in flags[0]["message"] and "cannot pin down" not in flags[0]["message"]
    assert diagnosis.attention_order()[0] == s
    assert not diagnosis.flagged("no-model")[1 - s]


def test_show_prints_why_an_overflowing_candidate_has_no_numbers(overflowing, tmp_path, capsys):
    results, s = overflowing
    out = tmp_path / "r.json"
    write_results(results, out, diagnose(results))
    record = json.loads(out.read_text())["series"][s]
    assert record["chosen"] is None and record["candidates"][0]["q2"] is None
    assert main(["show", str(out), "--product", "huge"]) == 0
    text = capsys.readouterr().out
    assert "[stop] no-model" in text
    assert "unavailable: its held-out errors overflow" in text.split("poly0", 1)[1].splitlines()[0]


def test_charts_never_hand_plotext_an_infinity(overflowing):
    results, s = overflowing
    fold_chart(results, s, 70, 14)
    chart = curve_chart(results, s, 70, 14, 0, {})  # poly0 on a series holding 1e200
    assert "observed" in chart.plain
