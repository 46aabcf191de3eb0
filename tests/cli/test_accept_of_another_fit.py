"""An accept made on one fit of the sample, read beside another fit of the same data (same fingerprints)
whose proposal differs: the shuffled folds follow the seed, so a fit with ``--seed 2`` and one with
``--seed 1`` choose differently for some series.  The accepted model stands, as an override does:
``show --ledger`` gives its own numbers at the plan price (checked against statsmodels OLS ``get_prediction``
of the straight line on the series' rows) and says that these results propose another model; the list's
flags are said to be the proposal's.
"""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from pricefold.cli import main

SAMPLE = Path(__file__).parents[2] / "sample"
FIT = ["--segment", "region", "--date", "week", "--plan", str(SAMPLE / "plan.csv"), "--quiet"]


def accepted_on_another_fit(folder: Path) -> tuple[Path, Path, dict, str]:
    """``(ledger, results fitted with --seed 1, key, its proposal)``: the unflagged series of the seed-2 fit
    accepted by ana; the key is one accepted as poly1 whose seed-1 proposal is another model, flagged rising."""
    book, first, second = folder / "ledger.jsonl", folder / "r.json", folder / "r_s1.json"
    assert main(["fit", str(SAMPLE / "wholesale.csv"), *FIT, "--seed", "2", "-o", str(first)]) == 0
    assert main(["ledger", "accept-unflagged", str(first), "--ledger", str(book), "--analyst", "ana", "-q"]) == 0
    assert main(["fit", str(SAMPLE / "wholesale.csv"), *FIT, "--seed", "1", "-o", str(second)]) == 0
    before = {json.dumps(r["key"]): r for r in json.loads(first.read_text())["series"]}
    moved = [r for r in json.loads(second.read_text())["series"]
             if (old := before[json.dumps(r["key"])])["chosen"] == "poly1" and not old["flags"]
             and r["chosen"] != "poly1" and r["fingerprint"] == old["fingerprint"]]
    record = next(r for r in moved if "rising" in {flag["code"] for flag in r["flags"]})
    return book, second, record["key"], record["chosen"]


@pytest.fixture(scope="module")
def other_fit(tmp_path_factory):
    return accepted_on_another_fit(tmp_path_factory.mktemp("other-fit"))


def line_at_plan(product: str, region: str) -> dict:
    """statsmodels OLS of volume on 1 and price over the series' rows: the prediction at its plan price, the
    95% prediction interval and the point elasticity there (the outside reference)."""
    import pandas as pd
    import statsmodels.api as sm
    rows = pd.read_csv(SAMPLE / "wholesale.csv")
    rows = rows[(rows["product"] == product) & (rows["region"] == region)]
    plans = pd.read_csv(SAMPLE / "plan.csv")
    plan = float(plans[(plans["product"] == product) & (plans["region"] == region)]["plan_price"].iloc[0])
    price, volume = rows["price"].to_numpy(float), rows["volume"].to_numpy(float)
    fit = sm.OLS(volume, np.column_stack([np.ones_like(price), price])).fit()
    frame = fit.get_prediction(np.array([[1.0, plan]])).summary_frame(alpha=0.05)
    mean = float(frame["mean"].iloc[0])
    return {"volume": mean, "lo": float(frame["obs_ci_lower"].iloc[0]), "hi": float(frame["obs_ci_upper"].iloc[0]),
            "elasticity": fit.params[1] * plan / mean}


def test_show_gives_the_accepted_model_and_says_these_results_propose_another(other_fit, capsys):
    """It printed "ledger: accepted" and nothing more, below poly4's plan numbers and flags."""
    from pricefold.show import number
    book, results, key, proposal = other_fit
    capsys.readouterr()
    assert main(["show", str(results), "--ledger", str(book), "--product", key["product"],
                 "--key", f"region={key['region']}"]) == 0
    out = capsys.readouterr().out
    assert f"chosen: {proposal} " in out and "ledger: accepted\n" in out
    reference = line_at_plan(key["product"], key["region"])
    (line,) = [text.strip() for text in out.splitlines() if text.strip().startswith("stands: ")]
    assert line.startswith("stands: poly1, accepted by ana at ")
    assert (f"volume {number(reference['volume'])} ({number(reference['lo'])} to {number(reference['hi'])}), "
            f"elasticity {reference['elasticity']:.2f}") in line
    assert f"these results propose {proposal} " in out and "look again" in out

    assert main(["show", str(results), "--ledger", str(book), "--product", key["product"]]) == 0
    label = f"{key['product']} · {key['region']}"
    row = next(text for text in capsys.readouterr().out.splitlines() if text.startswith(label))
    assert " poly1 " in row and row.rstrip().endswith(f"proposes {proposal}: rising")


def test_an_accept_of_the_proposal_adds_nothing(other_fit, capsys):
    """Where the accepted model is these results' proposal, show says only "accepted", as before."""
    book, _, key, _ = other_fit
    first = Path(book).parent / "r.json"
    capsys.readouterr()
    assert main(["show", str(first), "--ledger", str(book), "--product", key["product"],
                 "--key", f"region={key['region']}"]) == 0
    out = capsys.readouterr().out
    assert "ledger: accepted\n" in out and "stands: " not in out and "results propose" not in out
