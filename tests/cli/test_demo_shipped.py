"""The sample's results the demo ships (``sample/results.parquet``) are the engine's own: equal, cell for
cell (floats to 1e-12 relative: the compiled loops may round the last bit differently on another CPU's
vector instructions), to a fresh fit of ``sample/wholesale.csv`` and ``sample/plan.csv`` under the demo's settings, and the
demo places them in its folder naming this checkout's files, without writing into the sample folder."""
from __future__ import annotations

import json
import math
from pathlib import Path
from argparse import Namespace

import pytest

import pyarrow.parquet as pq

from pricefold import demo
from tui.factory import SAMPLE, fit_source, sample_source


@pytest.fixture(autouse=True)
def a_terminal(monkeypatch):
    """The demo refuses to start without a terminal (``pricefold.terminal``); here its screen is stubbed."""
    monkeypatch.setattr("pricefold.terminal.require_terminal", lambda what: None)


def test_shipped_results_equal_a_fresh_fit():
    sample = sample_source()
    fresh = demo.shipped_table(*fit_source(sample), sample)
    shipped = pq.ParquetFile(SAMPLE / demo.SHIPPED).read()
    assert shipped.schema.metadata[b"pricefold"] == fresh.schema.metadata[b"pricefold"]
    assert shipped.column_names == fresh.column_names
    for name in fresh.column_names:  # regenerate: python -m pricefold.demo --write-shipped
        assert same(shipped.column(name).to_pylist(), fresh.column(name).to_pylist()), name


def same(a, b) -> bool:
    """Equal values (text decoded from its dictionary, since Parquet merges a dictionary's repeats),
    floats to 1e-12 relative, NaN equal to NaN, lists element by element."""
    if isinstance(a, float) and isinstance(b, float):
        return (math.isnan(a) and math.isnan(b)) or math.isclose(a, b, rel_tol=1e-12, abs_tol=1e-300)
    if isinstance(a, list) and isinstance(b, list):
        return len(a) == len(b) and all(same(x, y) for x, y in zip(a, b))
    return type(a) is type(b) and a == b


def test_same_tells_a_last_digit_apart_from_a_change():
    assert same([[1.0, float("nan")], "a", None], [[1.0 + 1e-15, float("nan")], "a", None])
    assert not same([1.0], [1.0 + 1e-9]) and not same(["a"], ["b"]) and not same([1.0], [None])


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
    exact = lambda column: json.dumps(column.to_pylist(), default=str)  # noqa: E731  (a copy: every bit)
    assert all(exact(ours.column(name)) == exact(theirs.column(name)) for name in ours.column_names)
    assert demo.run_demo(args, open_triage) == 0  # a second run replaces its own file
    assert {path.name: path.stat().st_mtime_ns for path in SAMPLE.iterdir()} == before


def test_demo_with_controls_fits_first(tmp_path):
    opened = {}
    args = Namespace(dir=tmp_path / "demo", analyst=None, control=["promo"], season=0)
    assert demo.run_demo(args, lambda source, ledger, analyst, **kw: opened.update(kw) or 0) == 0
    assert (tmp_path / "demo" / "results.json").exists() and not opened.get("stored")


def test_the_demo_says_how_to_install_the_report_charts_as_the_readme_does(tmp_path, monkeypatch, capsys):
    """Before: 'pip install matplotlib' only, where README and `pricefold report` say the checkout's extra."""
    import importlib.util
    spec = importlib.util.find_spec
    monkeypatch.setattr(importlib.util, "find_spec", lambda name, *a: None if name == "matplotlib" else spec(name, *a))
    demo._report_hint(tmp_path / "results.parquet", tmp_path)
    err = capsys.readouterr().err
    assert "pip install -e '.[report]'" in err and "pip install -e '.[report]'" in (
        Path(__file__).resolve().parents[2] / "README.md").read_text(encoding="utf-8")


def test_a_folder_whose_ledger_is_not_one_is_refused_before_anything_is_written(tmp_path):
    """Before: the demo wrote ``results.parquet`` and printed how to come back to it, then refused the ledger,
    saying "nothing was done"."""
    from fitcore.ledger import LedgerError
    (tmp_path / "demo").mkdir()
    (tmp_path / "demo" / "ledger.jsonl").write_text("hello world\n")
    args = Namespace(dir=tmp_path / "demo", analyst=None, control=[], season=0)
    with pytest.raises(LedgerError, match="not a ledger.*nothing was done"):
        demo.run_demo(args, lambda *a, **kw: 0)
    assert sorted(p.name for p in (tmp_path / "demo").iterdir()) == ["ledger.jsonl"]
