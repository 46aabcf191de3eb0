"""Curve families through the command line: ``--semilog``, its settings-file key, and coefficient widths."""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pyarrow.parquet as pq

from fitcore.results.read import read_results
from fitcore.results.stored import stored_results
from pricefold.cli import main

SAMPLE = Path(__file__).parents[2] / "sample"


def fit(*args) -> int:
    return main(["fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "--quiet", *args])


def test_semilog_option_adds_the_candidate_with_plain_coefficients_and_smearing(tmp_path):
    out = tmp_path / "r.json"
    assert fit("--plan", str(SAMPLE / "plan.csv"), "--semilog", "-o", str(out)) == 0
    doc = json.loads(out.read_text())
    assert doc["settings"]["semilog"] is True
    checked = 0
    for series in doc["series"]:
        assert [c["name"] for c in series["candidates"]][-2:] == ["loglog", "semilog"]
        cand = series["candidates"][-1]
        assert cand["family"] == "semilog" and cand["degree"] is None
        if not cand["available"] or series["plan"] is None:
            continue
        a, b = cand["coef"]  # ln volume = a + b·price, as the README says
        np.testing.assert_allclose(np.exp(a + b * series["plan"]["price"]) * cand["smearing"], cand["plan_volume"],
                                   rtol=1e-9)
        checked += 1
    assert checked > 150


def test_semilog_from_the_settings_file_through_parquet_and_back(tmp_path, monkeypatch):
    (tmp_path / "pricefold.toml").write_text("[fit]\nsemilog = true\n")
    monkeypatch.chdir(tmp_path)
    out = tmp_path / "r.parquet"
    assert fit("-o", str(out)) == 0
    table = pq.read_table(out)
    assert "semilog" in table.column("family").to_pylist()
    semilog_rows = [row for row in table.to_pylist() if row["family"] == "semilog" and row["available"]]
    assert semilog_rows and all(row["smearing"] > 0 and len(row["coef"]) == 2 for row in semilog_rows)
    _, series = read_results(out)
    assert all("smearing" in c for s in series for c in s["candidates"] if c["family"] == "semilog")
    stored, _ = stored_results(out)
    assert stored.names[-1] == "semilog"
    s = int(np.flatnonzero(stored.available[:, -1])[0])
    assert stored.power_coef(s, len(stored.names) - 1) == next(
        c["coef"] for c in series[s]["candidates"] if c["name"] == "semilog")


def test_semilog_is_off_by_default(tmp_path):
    out = tmp_path / "r.json"
    assert fit("-o", str(out)) == 0
    doc = json.loads(out.read_text())
    assert doc["settings"]["semilog"] is False
    assert all(c["family"] != "semilog" for s in doc["series"] for c in s["candidates"])


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
