"""The sample's results the demo ships (``sample/results.parquet``) are the engine's own: equal, cell for
cell, to a fresh fit of ``sample/wholesale.csv`` and ``sample/plan.csv`` under the demo's settings, and the
demo places them in its folder naming this checkout's files, without writing into the sample folder."""
from __future__ import annotations

import json
from argparse import Namespace

import pyarrow.parquet as pq

from pricefold import demo
from tui.factory import SAMPLE, fit_source, sample_source


def test_shipped_results_equal_a_fresh_fit():
    sample = sample_source()
    fresh = demo.shipped_table(*fit_source(sample), sample)
    shipped = pq.ParquetFile(SAMPLE / demo.SHIPPED).read()
    assert shipped.schema.metadata[b"pricefold"] == fresh.schema.metadata[b"pricefold"]
    assert shipped.column_names == fresh.column_names
    for name in fresh.column_names:  # regenerate: python -m pricefold.demo --write-shipped
        assert values(shipped.column(name)) == values(fresh.column(name)), name


def values(column) -> str:
    """The column's values as exact text (shortest round-trip floats, NaN as NaN, null as null): text
    decoded from its dictionary, since Parquet merges a dictionary's repeats."""
    return json.dumps(column.to_pylist(), default=str)


def test_demo_places_the_shipped_results_and_opens_them_as_stored(tmp_path, monkeypatch):
    opened = {}

    def open_triage(source, ledger, analyst, stored=None, prepare=None):
        opened.update(source=source, ledger=ledger, stored=stored, prepare=prepare)
        return 0

    before = {path.name: path.stat().st_mtime_ns for path in SAMPLE.iterdir()}
    args = Namespace(dir=tmp_path / "demo", analyst=None, control=[], season=0)
    assert demo.run_demo(args, open_triage) == 0
    placed = tmp_path / "demo" / "results.parquet"
    assert opened["stored"] == placed and opened["prepare"] is demo.compile_elsewhere
    header = json.loads(pq.read_schema(placed).metadata[b"pricefold"])
    assert header["input"]["path"] == str(SAMPLE / "wholesale.csv")
    assert header["settings"]["plan"]["file"] == str(SAMPLE / "plan.csv")
    assert opened["source"].expected_sha256 == header["input"]["sha256"]
    ours, theirs = pq.ParquetFile(placed).read(), pq.ParquetFile(SAMPLE / demo.SHIPPED).read()
    assert ours.column_names == theirs.column_names
    assert all(values(ours.column(name)) == values(theirs.column(name)) for name in ours.column_names)
    assert demo.run_demo(args, open_triage) == 0  # a second run replaces its own file
    assert {path.name: path.stat().st_mtime_ns for path in SAMPLE.iterdir()} == before


def test_demo_with_controls_fits_first(tmp_path):
    opened = {}
    args = Namespace(dir=tmp_path / "demo", analyst=None, control=["promo"], season=0)
    assert demo.run_demo(args, lambda source, ledger, analyst, **kw: opened.update(kw) or 0) == 0
    assert (tmp_path / "demo" / "results.json").exists() and not opened.get("stored")
