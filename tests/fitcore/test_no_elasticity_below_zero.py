"""No elasticity is stored where the plan volume is at or below zero (the sample's lemons 500 g · East under
its straight line at 3.96: volume −268.89), as the screen, the report and the export say "no elasticity"
there; elsewhere the point elasticity is the calculus one, dV/dP·P/V of the fitted straight line (common
practice), checked beside it."""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pyarrow.parquet as pq

import fitcore
from fitcore.data.loader import Columns, load
from fitcore.data.plan import plan_prices
from fitcore.ledger.snapshot import from_results
from fitcore.results.write import write_results

SAMPLE = Path(__file__).parents[2] / "sample"


def test_a_plan_volume_at_or_below_zero_stores_no_elasticity(tmp_path):
    data = load(SAMPLE / "wholesale.csv", Columns(segments=("region",), date="week"))
    results = fitcore.fit_batch(data, plan_price=plan_prices(data, SAMPLE / "plan.csv"))
    s = next(s for s in range(data.n_series) if data.key_of(s) == {"product": "lemons 500 g", "region": "East"})
    c = results.names.index("poly1")
    assert results.plan_price[s] == 3.96 and results.plan_volume[s, c] < 0
    assert np.isnan(results.plan_elasticity[s, c])
    assert from_results(results, [s], c)[0]["plan"]["elasticity"] is None  # nor is one signed
    below = results.available & (results.plan_volume <= 0)
    assert np.isnan(results.plan_elasticity[below]).all()
    above = results.available & (results.plan_volume > 0) & (results.names.index("poly1") == np.arange(
        len(results.names)))[None, :]
    rows, cols = np.nonzero(above)
    a, b = (np.array([results.power_coef(r, k)[i] for r, k in zip(rows, cols)]) for i in (0, 1))
    price = results.plan_price[rows]
    np.testing.assert_allclose(results.plan_elasticity[rows, cols], b * price / (a + b * price), rtol=1e-9)
    write_results(results, tmp_path / "r.json")
    write_results(results, tmp_path / "r.parquet")
    record = json.loads((tmp_path / "r.json").read_text())["series"][s]
    assert next(x for x in record["candidates"] if x["name"] == "poly1")["plan_elasticity"] is None
    table = pq.read_table(tmp_path / "r.parquet").to_pandas()
    row = table[(table["product"] == "lemons 500 g") & (table["region"] == "East") & (table["candidate"] == "poly1")]
    assert row["plan_elasticity"].isna().all()
