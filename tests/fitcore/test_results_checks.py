"""A damaged results file is one line naming the file, the series, the field and what was expected.

The series record is a small invented one in the JSON layout the README describes; each case damages
one field and states, by hand, the line the checker must give.
"""
from __future__ import annotations

import copy
from pathlib import Path

import pytest

from fitcore.errors import DataError
from fitcore.results.checks import check_series

GOOD = {"key": {"product": "a", "region": "North"}, "n": 20, "price_range": [1.0, 2.0],
        "candidates": [{"name": "poly0", "available": True, "cv_mse": 4.0, "cv_se": 1.0, "r2": 0.0, "q2": -0.1,
                        "coef": [10.0]},
                       {"name": "poly1", "available": True, "cv_mse": 2.0, "cv_se": 0.5, "r2": 0.6, "q2": 0.5,
                        "coef": [20.0, -5.0]}],
        "chosen": "poly1", "score": 0.5, "flags": [], "fingerprint": "f",
        "plan": {"price": 1.5, "volume": 12.5, "lo": 9.0, "hi": 16.0, "level": 0.95, "elasticity": -0.6,
                 "inside_range": True}, "revenue_price": 2.0}


def damaged(change) -> dict:
    record = copy.deepcopy(GOOD)
    change(record)
    return record


CASES = [
    (lambda r: r.update(plan={"price": "x"}), "r.json: series 4, plan: 'price' should be a number, found text"),
    (lambda r: r["plan"].pop("inside_range"), "r.json: series 4, plan: missing 'inside_range'"),
    (lambda r: r["plan"].update(volume="lots"), "r.json: series 4, plan: 'volume' should be a number or null, "
                                                "found text"),
    (lambda r: r["plan"].update(inside_range=1), "r.json: series 4, plan: 'inside_range' should be true or false, "
                                                 "found a number"),
    (lambda r: r["candidates"][1].update(smearing="1.02"),
     "r.json: series 4, candidate 2: 'smearing' should be a number or null, found text"),
    (lambda r: r["candidates"][1].update(coef=[20.0, "x"]),
     "r.json: series 4, candidate 2: 'coef' should be a list of numbers or null, found a list whose item 2 is text"),
    (lambda r: r.update(price_range=[1.0, 2.0, 3.0]),
     "r.json: series 4: 'price_range' should be two numbers, found a list of 3"),
    (lambda r: r["key"].update(region=3), "r.json: series 4: 'key' should be an object of key columns and their "
                                          "text, found an object whose 'region' is a number"),
    (lambda r: r.update(key={}), "r.json: series 4: 'key' should be an object of key columns and their text, "
                                 "found an empty object"),
]


@pytest.mark.parametrize("change, line", CASES)
def test_each_damage_is_one_line_naming_series_field_and_expectation(change, line):
    with pytest.raises(DataError) as caught:
        check_series(Path("r.json"), 3, damaged(change))
    assert str(caught.value) == line + "; expected a pricefold results file"


def test_the_good_record_and_a_null_plan_pass():
    check_series(Path("r.json"), 0, GOOD)
    check_series(Path("r.json"), 0, damaged(lambda r: r.update(plan=None)))


def test_two_records_with_one_key_are_refused_on_reading(tmp_path):
    # A hand-edited file once listed "apples · North" twice, each with its own curve, in `show`.
    import json

    from fitcore.results.read import read_results
    path = tmp_path / "r.json"
    fitted = tmp_path / "fit.json"
    from pricefold.cli import main
    sample = Path(__file__).parents[2] / "sample"
    assert main(["fit", str(sample / "wholesale.csv"), "--segment", "region", "--date", "week", "-o", str(fitted),
                 "--quiet"]) == 0
    document = json.loads(fitted.read_text())
    document["series"].append(copy.deepcopy(document["series"][2]))
    path.write_text(json.dumps(document))
    key = ", ".join(f"{k}={v}" for k, v in sorted(document["series"][2]["key"].items()))
    with pytest.raises(DataError) as info:
        read_results(path)
    assert str(info.value) == (f"{path}: series {len(document['series'])}: has the same key as series 3 ({key}); "
                               "expected a pricefold results file")
