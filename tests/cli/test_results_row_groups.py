"""A results file written in many row groups reads back, through every reader, as the one-row-group file does.

``pricefold fit`` writes a Parquet results file a slice of whole series at a time, each slice its own
row group with its own dictionaries (keys, flags, fingerprints, candidates, chosen…).  Here the same fit
is written twice: as one row group (the reference: what pyarrow's ``write_table`` writes for a table
this small) and in slices of 3 series (dozens of row groups).  pyarrow reads both back to the same
columns; then every reader pricefold has (``read_results``, ``results_in_parts`` with its filters,
``stored_results`` with and without columns read later, ``show``) must give the same output from
both.  A reader that looked only at the first row group, or took one row group's dictionary for
another's, would differ.
"""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pyarrow.parquet as pq
import pytest

from fitcore.results.read import read_results, results_in_parts
from fitcore.results.stored import stored_results
from fitcore.results.table import ResultsTable
from pricefold.cli import main

SAMPLE = Path(__file__).resolve().parents[2] / "sample"
PLAN = ["--segment", "region", "--date", "week", "--plan", str(SAMPLE / "plan.csv")]
SERIES_PER_GROUP = 3


@pytest.fixture(scope="module")
def cases(tmp_path_factory):
    """{case: (one row group, many row groups)} for a fit with controls and a season, and one a week later
    against a ledger (the backtest columns)."""
    work = tmp_path_factory.mktemp("groups")
    signed, book, later = work / "signed.json", work / "ledger.jsonl", work / "later.csv"
    assert main(["fit", str(SAMPLE / "wholesale.csv"), *PLAN, "-o", str(signed), "-q"]) == 0
    assert main(["ledger", "accept-unflagged", str(signed), "--ledger", str(book), "--analyst", "test", "-q"]) == 0
    subprocess.run([sys.executable, str(SAMPLE / "next_week.py"), str(later), "--weeks", "3", "--from",
                    str(SAMPLE / "wholesale.csv")], check=True, capture_output=True)
    runs = {"controls": [str(SAMPLE / "wholesale.csv"), *PLAN, "--control", "promo", "--season", "1"],
            "ledger": [str(later), *PLAN, "--ledger", str(book)]}
    out = {}
    whole = ResultsTable.slices
    for case, args in runs.items():
        one, many = work / f"{case}.one.parquet", work / f"{case}.many.parquet"
        assert main(["fit", *args, "-o", str(one), "-q"]) == 0
        ResultsTable.slices = lambda self, series=None: whole(self, SERIES_PER_GROUP)
        try:
            assert main(["fit", *args, "-o", str(many), "-q"]) == 0
        finally:
            ResultsTable.slices = whole
        out[case] = one, many
    return out


def _text(value) -> str:
    return json.dumps(value, sort_keys=True, default=str)  # NaN written as NaN: equal to itself here


def test_the_files_differ_in_row_groups_only(cases):
    for one, many in cases.values():
        a, b = pq.ParquetFile(one), pq.ParquetFile(many)
        assert a.metadata.num_row_groups == 1
        assert b.metadata.num_row_groups == -(-a.metadata.num_rows // (SERIES_PER_GROUP * 7)) > 20
        x, y = a.read(), b.read()
        assert x.schema.equals(y.schema, check_metadata=True) and x.num_rows == y.num_rows
        for name in x.column_names:
            assert x.column(name).to_pylist() == y.column(name).to_pylist() or \
                _text(x.column(name).to_pylist()) == _text(y.column(name).to_pylist()), name
        # each row group its own dictionaries: a reader taking the first group's would misread the others
        firsts = [b.read_row_group(i, columns=["product"]).column(0).chunk(0).dictionary.to_pylist() for i in (0, 1)]
        assert firsts[0] != firsts[1]
    assert "backtest_status" in pq.read_schema(cases["ledger"][1]).names
    assert "control_coef" in pq.read_schema(cases["controls"][1]).names


def test_every_text_column_keeps_its_dictionary_in_every_row_group(cases):
    """Parquet's writer keeps a column's dictionary only if no text is in it twice; otherwise it writes every
    row's text in full (``PLAIN``).  The flags ("[]" for most series), the families, the regions and the
    controls' texts repeat across series: each row group's dictionary must hold each text once, the column
    read back (by pyarrow) the same texts.  (The backtest's texts are not made in ``table.py``.)"""
    for one, many in cases.values():
        for path in (one, many):
            meta = pq.ParquetFile(path).metadata
            schema = pq.read_schema(path)
            texts = [name for name in schema.names if str(schema.field(name).type).startswith("dictionary")
                     and not name.startswith("backtest_")]
            assert {"flags", "family", "region", "fingerprint", "candidate", "chosen"} <= set(texts)
            at = {meta.row_group(0).column(c).path_in_schema: c for c in range(meta.num_columns)}
            for g in range(meta.num_row_groups):
                for name in texts:
                    assert "RLE_DICTIONARY" in meta.row_group(g).column(at[name]).encodings, (path.name, g, name)
            flags = pq.read_table(path, columns=["flags"]).column(0).to_pylist()
            assert flags.count("[]") > 7 and all(json.loads(text) is not None for text in flags)


def test_read_results_and_its_filters_read_every_row_group(cases):
    for one, many in cases.values():
        assert _text(read_results(many)) == _text(read_results(one))
        records = read_results(one)[1]
        last = records[-1]["key"]  # a series in the last row group
        for products, keys in (([last["product"]], None), ([], {"region": last["region"]}),
                               ([records[0]["key"]["product"], last["product"]], {"region": last["region"]})):
            head_a, parts_a = results_in_parts(one, products, keys)
            head_b, parts_b = results_in_parts(many, products, keys)
            found = [r for part in parts_a for r in part]
            assert found and _text((head_b, [r for part in parts_b for r in part])) == _text((head_a, found))


ARRAYS = ("available", "cv_mse", "cv_se", "r2", "q2", "fold_start", "chosen", "price_lo", "price_hi", "mid", "half",
          "plan_price", "plan_volume", "plan_lo", "plan_hi", "plan_elasticity", "revenue_price", "score", "coef",
          "basis_mid", "basis_half", "smear", "sigma2", "df", "stored_last_date")


@pytest.mark.parametrize("later", [False, True])
def test_stored_results_read_every_row_group(cases, later):
    for case, (one, many) in cases.items():
        (a, flags_a), (b, flags_b) = stored_results(one, later), stored_results(many, later)
        if later:
            a.later.start(), b.later.start()
        n_s, n_c = a.available.shape
        for name in ARRAYS:
            np.testing.assert_array_equal(np.asarray(getattr(b, name)), np.asarray(getattr(a, name)), err_msg=name)
        assert b.data.fingerprints.to_pylist() == a.data.fingerprints.to_pylist()
        assert [b.data.key_of(s) for s in range(n_s)] == [a.data.key_of(s) for s in range(n_s)]
        assert [b.reason_text(s, c) for s in range(n_s) for c in range(n_c)] == \
            [a.reason_text(s, c) for s in range(n_s) for c in range(n_c)]
        for s in range(n_s):
            np.testing.assert_array_equal(b.folds_of(s), a.folds_of(s))
        every = np.arange(n_s)
        np.testing.assert_array_equal(b.stored_cov.cells(every), a.stored_cov.cells(every))
        np.testing.assert_array_equal(flags_b.raised, flags_a.raised)
        assert [flags_b.flags_of(s) for s in range(n_s)] == [flags_a.flags_of(s) for s in range(n_s)]
        assert flags_a.raised[n_s // 2:].any()  # flags past the first row group compared too
        if case == "controls":
            for name in ("coef", "left_out", "plan", "vif"):
                np.testing.assert_array_equal(getattr(b.controls, name), getattr(a.controls, name), err_msg=name)
            assert (a.controls.coef[n_s // 2:] != 0).any()
        else:
            assert _text({k: v.tolist() for k, v in b.stored_backtest.items()}) == \
                _text({k: v.tolist() for k, v in a.stored_backtest.items()})
            assert any(v is not None for v in a.stored_backtest["status"][n_s // 2:])


def test_show_prints_the_same_from_both(cases, capsys):
    for one, many in cases.values():
        shown = []
        for path in (one, many):
            for args in ([], ["--product", read_results(one)[1][-1]["key"]["product"]]):
                main(["show", str(path), *args])
                shown.append(capsys.readouterr().out)
        assert shown[0] and shown[:2] == shown[2:]


@pytest.mark.parametrize("where", ["building", "writing"])
def test_a_run_failing_between_row_groups_leaves_the_earlier_file_as_it_was(tmp_path, monkeypatch, capsys, where):
    """The file is staged under a temporary name (``outputs.atomic``): a failure after some row groups are
    written, in the thread writing them or in the one building the next, leaves the earlier results whole."""
    import hashlib

    out = tmp_path / "r.parquet"
    args = ["fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "-o", str(out), "-q"]
    assert main(args) == 0
    earlier = hashlib.sha256(out.read_bytes()).hexdigest()
    calls = []
    owner, name = (ResultsTable, "slice") if where == "building" else (pq.ParquetWriter, "write_table")
    original = getattr(owner, name)

    def failing(self, *a, **k):
        calls.append(1)
        if len(calls) == 3:
            raise OSError(28, "No space left on device")
        return original(self, *a, **k)
    monkeypatch.setattr(owner, name, failing)
    whole = ResultsTable.slices
    monkeypatch.setattr(ResultsTable, "slices", lambda self, series=None: whole(self, SERIES_PER_GROUP))
    assert main(args) == 2
    assert "No space left on device" in capsys.readouterr().err and len(calls) == 3
    assert hashlib.sha256(out.read_bytes()).hexdigest() == earlier
    assert [p.name for p in tmp_path.iterdir()] == ["r.parquet"]


@pytest.mark.parametrize("folds", [5, "loo"])
def test_slices_put_together_are_the_whole_table(folds):
    """Every column of the slices, put together, equals the table built for all series at once (leave-one-out:
    series with different numbers of folds; weights; many unavailable cells), including slices that are not
    whole blocks of the covariances' series."""
    import pyarrow as pa

    import fitcore
    from fitcore.results.write import header
    from fitcore.review.flags import diagnose
    from tests.conftest import random_dataset
    data = random_dataset(23, n_series=60, n_range=(2, 30), with_weight=True, with_date=True)
    results = fitcore.fit_batch(data, fitcore.FitSettings(folds=folds))
    diagnosis = diagnose(results)
    table = ResultsTable(results, header(results, diagnosis), diagnosis)
    whole = table.whole()
    parts = list(table.slices(7))
    assert len(parts) == 9 and (~results.available).any()
    assert (len(set(np.diff(results.fold_start).tolist())) > 1) == (folds == "loo")  # both ways of taking folds
    together = pa.concat_tables(parts)
    assert together.schema.equals(whole.schema, check_metadata=True)
    for name in whole.column_names:
        assert _text(together.column(name).to_pylist()) == _text(whole.column(name).to_pylist()), name


@pytest.mark.parametrize("run", [1, 20, 10 ** 6])
def test_flags_made_run_by_run_are_each_series_flags_as_json_dumps_writes_them(monkeypatch, run):
    """The flags' texts are made a run of series at a time (``FlagTexts``), the sentences quoting an observation
    (its volume, line and date: rows the table no longer holds) for all series first.  Runs of 1 series, of 20
    (a run serving several slices of 7, and slices straddling two runs) and of all: each series' text is what
    the standard library's ``json.dumps`` writes of the diagnosis' own ``flags_of``, series by series."""
    import fitcore
    import fitcore.results.table as table_module
    from fitcore.results.write import header
    from fitcore.review.flags import CODES, diagnose
    from tests.conftest import random_dataset
    monkeypatch.setattr(table_module, "FLAG_RUN", run)
    data = random_dataset(23, n_series=80, n_range=(2, 30), with_weight=True, with_date=True)
    results = fitcore.fit_batch(data, fitcore.FitSettings())
    diagnosis = diagnose(results)
    counts = dict(zip(CODES, diagnosis.raised.sum(axis=0).tolist()))
    assert counts["near-tie"] and counts["weak-fit"] and counts["influential-point"] and counts["unsteady-folds"]
    table = ResultsTable(results, header(results, diagnosis), diagnosis)
    n_c = results.available.shape[1]
    flags = [text for part in table.slices(7) for text in part.column("flags").to_pylist()[::n_c]]
    assert flags == [json.dumps(diagnosis.flags_of(s), ensure_ascii=False) for s in range(results.n_series)]


def test_each_row_group_is_handed_to_the_disk_as_written_and_the_handle_closed(tmp_path, monkeypatch):
    """Where the file system cannot be written around the page cache (``outputs.direct``: no O_DIRECT), the
    results' write starts the disk's write of every row group as soon as it is written
    (``write.early_writeback``), so the fsync at the end finds little left: called once a row group (the
    file's own count, read back by pyarrow), its file handle closed once at the end."""
    import fitcore.outputs.direct as direct
    import fitcore.results.write as write
    monkeypatch.setattr(direct, "direct_file", lambda name: None)
    seen = {"calls": 0, "closed": 0, "sizes": []}
    original = write.early_writeback

    def counting(name):
        start = original(name)
        if start is None:
            pytest.skip("no sync_file_range here")

        def counted():
            seen["calls"] += 1
            start()
            seen["sizes"].append(Path(name).stat().st_size)
        counted.close = lambda: (seen.__setitem__("closed", seen["closed"] + 1), start.close())
        return counted
    monkeypatch.setattr(write, "early_writeback", counting)
    whole = ResultsTable.slices
    monkeypatch.setattr(ResultsTable, "slices", lambda self, series=None: whole(self, SERIES_PER_GROUP))
    out = tmp_path / "r.parquet"
    assert main(["fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "-o", str(out), "-q"]) == 0
    groups = pq.ParquetFile(out).metadata.num_row_groups
    assert groups > 3 and seen["calls"] == groups and seen["closed"] == 1
    assert seen["sizes"] == sorted(seen["sizes"]) and seen["sizes"][-1] < out.stat().st_size  # then the footer
