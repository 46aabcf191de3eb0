"""Curve families through the command line: coefficient widths."""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pyarrow.parquet as pq

from fitcore.results.stored import stored_results
from pricefold.cli import main

SAMPLE = Path(__file__).parents[2] / "sample"


def fit(*args) -> int:
    return main(["fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "--quiet", *args])


def test_degree_zero_alone_beside_loglog_fits_and_writes(tmp_path):
    """Coefficient arrays are as wide as the widest candidate (loglog: 2), not the highest degree + 1."""
    for name in ("r.json", "r.parquet"):
        assert fit("--degrees", "0-0", "-o", str(tmp_path / name)) == 0
    doc = json.loads((tmp_path / "r.json").read_text())
    for series in doc["series"]:
        poly0, loglog = series["candidates"]
        assert poly0["name"] == "poly0" and (poly0["coef"] is None or len(poly0["coef"]) == 1)
        assert loglog["name"] == "loglog" and (loglog["coef"] is None or len(loglog["coef"]) == 2)
    assert pq.read_table(tmp_path / "r.parquet").schema.field("window_coef").type.list_size == 2
    stored, _ = stored_results(tmp_path / "r.parquet")
    assert stored.coef.shape[-1] == 2
