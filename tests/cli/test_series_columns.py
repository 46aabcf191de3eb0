"""``show`` lists and ``ledger export`` on Parquet results read column by column (``series_columns``), and
give what the record reader gives.

The oracle is the record reader itself: the same fit written as JSON goes through ``read.read_results``
(a record per series, every candidate), the Parquet file and a results folder of its parts through the
column reader; lists, exports and the one line for a damaged file must be the same text.  The fits are of
the bundled invented sample, with a ledger holding accepts, overrides, holds, carries and decisions made on
older data (stale), and a second cycle fitted against it (the backtest columns).
"""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from fitcore import ledger
from fitcore.errors import DataError
from fitcore.ledger.replay import series_id
from fitcore.results import read
from fitcore.results.read import read_results
from pricefold.cli import main
from tests.fitcore.ledger_support import ANA

SAMPLE = Path(__file__).resolve().parents[2] / "sample"
PLAN = ["--segment", "region", "--date", "week", "--plan", str(SAMPLE / "plan.csv")]


def _as_folder(parquet: Path, folder: Path, cut: int) -> Path:
    """A results folder (as ``fit --engine dask`` writes one) of ``parquet``'s series, split after ``cut``."""
    table = pq.read_table(parquet)
    n_c = 7
    folder.mkdir()
    pq.write_table(table.slice(0, cut * n_c), folder / "part-00000.parquet")
    pq.write_table(table.slice(cut * n_c), folder / "part-00001.parquet")
    (folder / read.RUN_SUMMARY).write_text("{}")
    return folder


@pytest.fixture(scope="module")
def cycle(tmp_path_factory):
    """Two cycles of the sample, each as JSON, Parquet and a results folder, and the ledger between them."""
    work = tmp_path_factory.mktemp("columns")
    book = work / "ledger.jsonl"
    first = {kind: work / f"first.{kind}" for kind in ("json", "parquet")}
    for path in first.values():
        assert main(["fit", str(SAMPLE / "wholesale.csv"), *PLAN, "-o", str(path), "-q"]) == 0
    assert main(["ledger", "accept-unflagged", str(first["json"]), "--ledger", str(book), "--analyst", "t", "-q"]) == 0
    document = json.loads(first["json"].read_text())
    flagged = [s for s in document["series"] if s["flags"] and s["chosen"]]
    entries = []
    for i, s in enumerate(flagged[:8]):  # overrides to another available candidate, and holds
        other = next(c["name"] for c in s["candidates"] if c["available"] and c["name"] != s["chosen"])
        action, model = ("override", other) if i % 2 == 0 else ("hold", s["chosen"])
        entries.append(ledger.Entry(series=s["key"], action=action, fingerprint=s["fingerprint"],
                                    results=ledger.results_digest(document), model=model, proposed=s["chosen"],
                                    note="=looked at", flags=[f["code"] for f in s["flags"]]))
    ledger.append(book, entries, ANA)
    later = work / "later.csv"
    subprocess.run([sys.executable, str(SAMPLE / "next_week.py"), str(later), "--weeks", "3", "--from",
                    str(SAMPLE / "wholesale.csv")], check=True, capture_output=True)
    second = {kind: work / f"second.{kind}" for kind in ("json", "parquet")}
    for path in second.values():
        assert main(["fit", str(later), *PLAN, "--ledger", str(book), "-o", str(path), "-q"]) == 0
    before = ledger.Ledger(book).head_text
    assert main(["ledger", "carry", str(second["json"]), "--ledger", str(book), "-q"]) == 0
    assert ledger.Ledger(book).head_text != before  # some decisions carried, the rest stale
    for runs in (first, second):
        runs["folder"] = _as_folder(runs["parquet"], work / (runs["json"].stem + ".folder"), 61)
    return first, second, book


def _show(capsys, *args) -> tuple[int, str, str]:
    code = main(["show", *map(str, args)])
    out = capsys.readouterr()
    return code, out.out, out.err


LISTS = [[], ["--flag", "near-tie"], ["--key", "region=East"], ["--flag", "no-such-flag"],
         ["--product", "lemons 500 g", "--product", "mangoes 2 pack"], ["--product", "lemons 500 g", "--key",
                                                                        "region=East"]]


@pytest.mark.parametrize("args", LISTS, ids=lambda a: " ".join(a) or "all")
@pytest.mark.parametrize("run", [0, 1], ids=["first", "second"])
def test_a_list_from_parquet_is_the_record_readers(cycle, capsys, run, args):
    runs, book = cycle[run], cycle[2]
    for extra in ([], ["--ledger", book]):
        said = [_show(capsys, runs[kind], *args, *extra) for kind in ("json", "parquet", "folder")]
        said = [(code, out, err.replace(str(runs[kind]), "RESULTS"))
                for (code, out, err), kind in zip(said, ("json", "parquet", "folder"))]
        assert said[1] == said[0] and said[2] == said[0]
    if not args:  # the lists are worth comparing: every series, with ledger states and backtests
        lines = _show(capsys, runs["parquet"], "--ledger", book)[1].splitlines()
        assert len(lines) == 181
        states = {"pending", "accepted", "overridden", "held"} if run == 0 else {"stale", "accepted (carried)"}
        assert all(any(f" {state} " in line for line in lines) for state in states)
        if run == 1:  # backtests read: a ratio (the 5 characters after series, n, chosen, status and due)
            assert any(line[98:103].strip() not in ("—", "") for line in lines[1:])


def test_a_list_reads_no_record_and_one_series_is_read_whole(cycle, capsys, monkeypatch):
    runs = cycle[1]
    whole = [_show(capsys, runs["json"], *args) for args in (["--flag", "near-tie"], ["--product", "lemons 500 g",
                                                                                      "--key", "region=East"])]
    calls = []
    real = read._read_parquet

    def counted(path, filters=None, rows=None, first=0):
        assert rows is not None and rows[1] - rows[0] == 7, "a record read for more than the one series shown"
        calls.append(rows)
        return real(path, filters, rows, first)
    monkeypatch.setattr(read, "_read_parquet", counted)
    for kind in ("parquet", "folder"):
        calls.clear()
        assert _show(capsys, runs[kind], "--flag", "near-tie") == whole[0] and not calls
        assert _show(capsys, runs[kind], "--product", "lemons 500 g", "--key", "region=East") == whole[1]
        assert len(calls) == 1
    assert "CV MSE" in whole[1][1] and "ledger" not in whole[1][1]


def _export(path: Path, book: Path, out: Path, *extra) -> bytes:
    assert main(["ledger", "export", str(book), "--results", str(path), "-o", str(out), *extra]) == 0
    return out.read_bytes()


@pytest.mark.parametrize("run", [0, 1], ids=["first", "second"])
def test_an_export_from_parquet_is_the_record_readers(cycle, tmp_path, run):
    runs, book = cycle[run], cycle[2]
    for extra in ([], ["--raw"]):
        made = {kind: _export(runs[kind], book, tmp_path / f"{kind}.csv", *extra) for kind in runs}
        assert made["parquet"] == made["json"] and made["folder"] == made["json"]
    text = made["json"].decode()
    states = {"pending", "accepted", "overridden", "held"} if run == 0 else {"stale", "accepted"}
    assert all(f",{state}," in text for state in states)
    assert "'=looked at" not in text and "=looked at" in text  # --raw last


def test_an_export_reads_no_record(cycle, tmp_path, monkeypatch):
    runs, book = cycle[0], cycle[2]
    expected = _export(runs["json"], book, tmp_path / "json.csv")

    def refused(*args, **kwargs):
        raise AssertionError("a Parquet export read records")
    monkeypatch.setattr(read, "_read_parquet", refused)
    for kind in ("parquet", "folder"):
        assert _export(runs[kind], book, tmp_path / f"{kind}.csv") == expected


# -- damaged files: one line naming the file, the record reader's where it has one ----------------------

def _damaged(source: Path, target: Path, change) -> Path:
    table = pq.read_table(source)
    columns = {name: table.column(name).to_pylist() for name in table.column_names}
    change(columns)
    fields = [table.schema.field(name) for name in columns]
    arrays = [pa.array(values, type=f.type.value_type if pa.types.is_dictionary(f.type) else f.type)
              for f, values in zip(fields, columns.values())]
    names = list(columns)
    pq.write_table(pa.Table.from_arrays(arrays, names=names).replace_schema_metadata(table.schema.metadata), target)
    return target


def _cells(name: str, series: int, value):
    def change(columns):
        for r in range(series * 7, series * 7 + 7):
            columns[name][r] = value
    return change


def _drop(*names):
    def change(columns):
        for name in names:
            del columns[name]
    return change


def _drop_row(row: int):
    def change(columns):
        for values in columns.values():
            del values[row]
    return change


def _swap_rows(a: int, b: int):
    def change(columns):
        for values in columns.values():
            values[a], values[b] = values[b], values[a]
    return change


BAD_FLAG = json.dumps([{"code": "weak-fit", "severity": "loud", "message": "x"}])
# damage → what it must say: the record reader's line (None), or a text the line holds
DAMAGE = {"flags not JSON": (_cells("flags", 4, "[{oops"), None),
          "flags null": (_cells("flags", 5, None), None),
          "a flag's severity": (_cells("flags", 6, BAD_FLAG), None),
          "fingerprint null": (_cells("fingerprint", 3, None), None),
          "key null": (_cells("region", 9, None), None),
          "chosen not a candidate": (_cells("chosen", 2, "poly9"), None),
          "n negative": (_cells("n", 8, -1), None),
          "score column missing": (_drop("score"), None),
          "a row missing": (_drop_row(7 * 20 + 3), "expected 7 rows per series, found 1259 rows"),
          "candidates out of order": (_swap_rows(7 * 30 + 1, 7 * 30 + 2), "row 212: expected candidate 'poly1', "
                                                                          "found 'poly2'")}


EXPORT_DAMAGE = ["fingerprint null", "key null", "chosen not a candidate", "score column missing", "a row missing",
                 "candidates out of order"]


def _damaged_and_said(results: Path, folder: Path, damage: str) -> tuple[Path, str]:
    """The results with ``damage`` done, and what a reader must say of them: the record reader's line where
    it has one (it reads every field), else the text ``DAMAGE`` gives."""
    change, says = DAMAGE[damage]
    path = _damaged(results, folder / "bad.parquet", change)
    if says is None:
        with pytest.raises(DataError) as caught:
            read_results(path)
        says = str(caught.value)
    return path, says


@pytest.mark.parametrize("damage", EXPORT_DAMAGE)
def test_a_damaged_file_stops_an_export_in_one_line(cycle, tmp_path, capsys, damage):
    path, says = _damaged_and_said(cycle[0]["parquet"], tmp_path, damage)
    code = main(["ledger", "export", str(cycle[2]), "--results", str(path), "-o", str(tmp_path / "out.csv")])
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1 and str(path) in err and says in err, err
    assert not (tmp_path / "out.csv").exists()


@pytest.mark.parametrize("damage", DAMAGE)
def test_a_damaged_file_is_one_line_naming_it(cycle, tmp_path, capsys, damage):
    path, says = _damaged_and_said(cycle[1]["parquet"], tmp_path, damage)
    for args in ([], ["--flag", "near-tie"], ["--ledger", cycle[2]]):
        code, out, err = _show(capsys, path, *args)
        assert (code, out) == (2, "") and err.count("\n") == 1 and str(path) in err, err
        assert says in err and "Traceback" not in err


@pytest.mark.parametrize("coef", [[1.0, -2.5e-07, 3e20, 0.1 + 0.2, 123456789.123456789, -0.0], [1, 2.0], [True, 1.0],
                                  [None, 1.0], [float("nan")], [float("inf"), 1.0], []])
def test_coefficients_are_written_as_json_writes_them(coef):
    from pricefold.ledger_export import coef_text
    assert coef_text(coef) == json.dumps(coef)  # the oracle: Python's json module
