"""``show --ledger`` on one series whose standing accept is of a model these results did not fit (the sample
accepted as shipped, where loglog is proposed for many series, then refitted with ``--no-loglog``): it printed
"stands: loglog, accepted by …" and no numbers.  Now it gives the signed curve's numbers at the plan price, from
the ledger's snapshot, and says they are the curve as signed, not these results'.  Checked against the shipped
results the accept was made on, and the volume and elasticity against statsmodels OLS of ln volume on ln price
times Duan's smearing factor (the outside reference)."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pyarrow.parquet as pq
import pytest

from pricefold.cli import main
from pricefold.show import number

SAMPLE = Path(__file__).resolve().parents[2] / "sample"


def loglog_at(product: str, region: str, price: float) -> tuple[float, float]:
    import pandas as pd
    import statsmodels.api as sm
    rows = pd.read_csv(SAMPLE / "wholesale.csv")
    rows = rows[(rows["product"] == product) & (rows["region"] == region)]
    x, y = np.log(rows["price"].to_numpy(float)), np.log(rows["volume"].to_numpy(float))
    fit = sm.OLS(y, np.column_stack([np.ones_like(x), x])).fit()
    smearing = float(np.mean(np.exp(fit.resid)))
    return float(np.exp(fit.params[0] + fit.params[1] * np.log(price)) * smearing), float(fit.params[1])


@pytest.fixture(scope="module")
def refitted(tmp_path_factory):
    """(ledger: the shipped sample's unflagged series accepted, results refitted with --no-loglog)."""
    folder = tmp_path_factory.mktemp("no-loglog")
    book = folder / "ledger.jsonl"
    assert main(["ledger", "accept-unflagged", str(SAMPLE / "results.parquet"), "--ledger", str(book), "-q"]) == 0
    assert main(["fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "--date", "week", "--plan",
                 str(SAMPLE / "plan.csv"), "--no-loglog", "-q", "-o", str(folder / "r.json")]) == 0
    return book, folder / "r.json"


def test_show_gives_the_signed_numbers_of_a_model_these_results_did_not_fit(refitted, capsys):
    book, results = refitted
    rows = pq.read_table(SAMPLE / "results.parquet").to_pylist()
    signed = next(r for r in rows if r["is_chosen"] and r["candidate"] == "loglog" and r["flags"] == "[]")
    capsys.readouterr()
    assert main(["show", str(results), "--ledger", str(book), "--product", signed["product"],
                 "--key", f"region={signed['region']}"]) == 0
    out = capsys.readouterr().out
    (line,) = [text.strip() for text in out.splitlines() if text.strip().startswith("stands: ")]
    assert line.startswith("stands: loglog, accepted by ")
    assert "these results did not fit loglog: the curve as signed, at the plan price" in line, line
    volume, elasticity = loglog_at(signed["product"], signed["region"], signed["plan_price"])
    assert abs(volume / signed["plan_volume"] - 1) < 1e-9 and abs(elasticity - signed["plan_elasticity"]) < 1e-9
    assert (f"volume {number(signed['plan_volume'])} ({number(signed['plan_lo'])} to {number(signed['plan_hi'])}), "
            f"elasticity {signed['plan_elasticity']:.2f}") in line, line


def test_the_list_says_a_proposal_has_no_flags(refitted, capsys):
    """"proposes poly1: —" read as a missing number: the proposal of these results has no flags."""
    book, results = refitted
    capsys.readouterr()
    assert main(["show", str(results), "--ledger", str(book)]) == 0
    rows = [row for row in capsys.readouterr().out.splitlines() if " proposes " in row]
    assert rows and not any(row.rstrip().endswith(": —") for row in rows), rows
    assert any(row.rstrip().endswith(": no flags") for row in rows), rows
