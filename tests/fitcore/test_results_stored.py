"""A Parquet results file opened without a refit: the same arrays as the fit that wrote it.

The reference here is the fit itself (``fit_batch`` + ``diagnose``) written through
``write_results``: every array triage reads must come back bit for bit.
"""
from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pyarrow.parquet as pq
import pytest

import fitcore
from fitcore.errors import DataError
from fitcore.results.stored import stored_results
from fitcore.results.write import write_results
from fitcore.review.flags import diagnose
from tests.conftest import random_dataset

ARRAYS = ("available", "cv_mse", "cv_se", "r2", "q2", "fold_start", "chosen", "price_lo", "price_hi",
          "mid", "half", "plan_price", "plan_volume", "plan_lo", "plan_hi", "plan_elasticity", "revenue_price",
          "score")


@pytest.mark.parametrize("folds, semilog", [(5, False), ("loo", True)])
def test_stored_results_equal_the_fit_that_wrote_them(tmp_path, folds, semilog):
    data = random_dataset(41, n_series=120, n_range=(3, 40))
    plan = np.where(np.arange(data.n_series) % 3 == 0, np.nan, data.price[data.offsets[:-1]] * 1.1)
    results = fitcore.fit_batch(data, fitcore.FitSettings(folds=folds, semilog=semilog), plan_price=plan)
    diagnosis = diagnose(results)
    write_results(results, tmp_path / "r.parquet", diagnosis)
    stored, flags = stored_results(tmp_path / "r.parquet")
    assert not stored.rows_loaded and results.rows_loaded
    for name in ARRAYS:
        np.testing.assert_array_equal(getattr(stored, name), getattr(results, name), err_msg=name)
    ok = results.available
    for s in range(data.n_series):
        np.testing.assert_array_equal(stored.folds_of(s), np.where(ok[s], results.folds_of(s), np.nan))
    np.testing.assert_array_equal(stored.coef[ok], results.coef[ok])
    for name in ("basis_mid", "basis_half", "smear"):  # each candidate's window and smearing, where it is fitted
        np.testing.assert_array_equal(getattr(stored, name)[ok], getattr(results, name)[ok], err_msg=name)
    assert stored.names == results.names and (stored.names[-1] == "semilog") == semilog
    assert stored.data.fingerprints.to_pylist() == results.data.fingerprints
    assert stored.data.counts.tolist() == results.data.counts.tolist()
    assert stored.data.keys["product"].to_pylist() == results.data.keys["product"].tolist()
    assert [stored.data.key_of(s) for s in range(3)] == [results.data.key_of(s) for s in range(3)]
    assert [stored.reason_text(s, c) for s in range(5) for c in range(7)] == \
        [results.reason_text(s, c) for s in range(5) for c in range(7)]
    np.testing.assert_array_equal(flags.raised, diagnosis.raised)
    np.testing.assert_array_equal(flags.attention_order(), diagnosis.attention_order())
    assert all(flags.flags_of(s) == diagnosis.flags_of(s) for s in range(data.n_series))
    assert (~ok).any() and diagnosis.raised.any()  # the comparison covered unavailable cells and flags


def test_a_results_file_without_the_window_coefficients_is_refused(tmp_path):
    results = fitcore.fit_batch(random_dataset(3, n_series=5))
    write_results(results, tmp_path / "r.parquet")
    table = pq.read_table(tmp_path / "r.parquet")
    pq.write_table(table.drop_columns(["window_coef"]), tmp_path / "old.parquet")
    with pytest.raises(DataError, match="window_coef"):
        stored_results(tmp_path / "old.parquet")


def test_opening_results_imports_neither_pandas_nor_numba(tmp_path):
    """Both cost ~0.2–0.3 s at start-up; opening results needs neither."""
    results = fitcore.fit_batch(random_dataset(4, n_series=5))
    write_results(results, tmp_path / "r.parquet")
    code = ("import sys; from fitcore.results.stored import stored_results; "
            f"stored_results({str(tmp_path / 'r.parquet')!r}); "
            "print(sorted(m for m in ('pandas', 'numba') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"


def test_columns_read_behind_the_list_come_from_the_file_opened(tmp_path):
    """Another fit replacing the results file (same name, an atomic rename) while a screen shows it: the
    columns read later are still the opened file's, never the new one's beside the old list."""
    path = tmp_path / "r.parquet"
    first = fitcore.fit_batch(random_dataset(8, n_series=30))
    write_results(first, path)
    stored, _ = stored_results(path, later=True)
    write_results(fitcore.fit_batch(random_dataset(9, n_series=30)), path)  # replaced before the rest is read
    assert not stored.later.ready
    assert stored.later.table().column("window_coef") != pq.read_table(path).column("window_coef")
    ok = first.available
    np.testing.assert_array_equal(stored.coef[ok], first.coef[ok])  # the opened file's, bit for bit
    np.testing.assert_array_equal(np.asarray(stored.sigma2)[ok], first.sigma2[ok])
    np.testing.assert_array_equal(np.asarray(stored.cv_mse)[ok], first.cv_mse[ok])  # read just after the list's


def test_opened_for_a_list_only_the_lists_columns_are_read_before_it_returns(tmp_path, monkeypatch):
    """``later=True`` (triage): the candidates' numbers and the largest columns are read in a thread behind
    the list (the Parquet read of every column was most of the list's wait at 100,000 series); whatever is
    made of them waits for them where used, and equals the fit that wrote the file."""
    import threading
    data = random_dataset(43, n_series=60, n_range=(3, 30))
    results = fitcore.fit_batch(data, plan_price=data.price[data.offsets[:-1]] * 1.1)
    write_results(results, tmp_path / "r.parquet", diagnose(results))
    reads, original = [], pq.ParquetFile.read

    def read(self, columns=None, *args, **kwargs):
        reads.append((threading.current_thread() is threading.main_thread(), tuple(columns or ())))
        return original(self, columns, *args, **kwargs)
    monkeypatch.setattr(pq.ParquetFile, "read", read)
    stored, _ = stored_results(tmp_path / "r.parquet", later=True)
    before = {name for here, columns in reads if here for name in columns}
    assert {"n", "candidate", "is_chosen", "score", "flags", "fingerprint", "price_lo", "price_hi"} <= before
    assert not before & {"cv_mse", "cv_se", "r2", "q2", "plan_volume", "plan_lo", "plan_hi", "plan_elasticity",
                         "smearing", "plan_price", "revenue_price", "window_coef", "fold_mse", "reason"}, before
    for name in ARRAYS:
        np.testing.assert_array_equal(np.asarray(getattr(stored, name)), getattr(results, name), err_msg=name)
    ok = results.available
    for name in ("basis_mid", "basis_half", "smear"):  # where each candidate is fitted
        np.testing.assert_array_equal(getattr(stored, name)[ok], getattr(results, name)[ok], err_msg=name)
    assert stored.numbers_ready


def _rewritten(path, out, **changes):
    """The results file at ``path`` written again to ``out`` (its header kept), ``changes`` as pyarrow's writer
    options; ``flags``: a function of the flags column's texts giving new texts."""
    import pyarrow as pa
    table = pq.read_table(path)
    edit = changes.pop("flags", None)
    if edit is not None:
        texts = pa.array(edit(table.column("flags").to_pylist()), pa.string()).dictionary_encode()
        table = table.set_column(table.schema.get_field_index("flags"), "flags", texts)
    pq.write_table(table, out, **changes)


def test_results_in_row_groups_that_split_series_read_as_one_group(tmp_path):
    """Each series' values are taken row group by row group (each with its own dictionaries); a row group
    that starts inside a series (7 candidate rows a series, 5 rows a group) still gives every series' own."""
    data = random_dataset(44, n_series=40, n_range=(3, 30))
    results = fitcore.fit_batch(data, plan_price=data.price[data.offsets[:-1]] * 1.05)
    diagnosis = diagnose(results)
    write_results(results, tmp_path / "r.parquet", diagnosis)
    _rewritten(tmp_path / "r.parquet", tmp_path / "split.parquet", row_group_size=5)
    assert pq.ParquetFile(tmp_path / "split.parquet").metadata.num_row_groups == 56
    stored, flags = stored_results(tmp_path / "split.parquet")
    for name in ARRAYS:  # the reference: the fit that wrote the file
        np.testing.assert_array_equal(getattr(stored, name), getattr(results, name), err_msg=name)
    assert stored.data.fingerprints.to_pylist() == results.data.fingerprints
    assert stored.data.keys["product"].to_pylist() == results.data.keys["product"].tolist()
    np.testing.assert_array_equal(flags.raised, diagnosis.raised)
    assert all(flags.flags_of(s) == diagnosis.flags_of(s) for s in range(data.n_series))
    assert diagnosis.raised.any() and not diagnosis.raised.all()


def test_an_unreadable_flags_text_is_one_line_naming_its_row(tmp_path):
    """A flags text that is not JSON: a ``DataError`` naming the file, the first row holding it and the column
    (not a JSON traceback); the same text on a series' every row, as the writer repeats it."""
    results = fitcore.fit_batch(random_dataset(45, n_series=6))
    write_results(results, tmp_path / "r.parquet", diagnose(results))
    n_c = len(results.candidates)
    cut = '[{"code": "rising"'  # a list cut short
    _rewritten(tmp_path / "r.parquet", tmp_path / "bad.parquet",
               flags=lambda texts: [cut if 2 * n_c <= r < 3 * n_c else t for r, t in enumerate(texts)])
    with pytest.raises(DataError, match=rf"bad\.parquet.*row {2 * n_c + 1}, column 'flags': expected JSON text"):
        stored_results(tmp_path / "bad.parquet")


def test_series_with_the_same_rows_keep_their_fingerprints(tmp_path):
    """Two series with the same rows share a fingerprint (one dictionary entry for both); each series still
    reads its own, as the fit computed them."""
    data = random_dataset(46, n_series=12)
    first = np.arange(data.offsets[0], data.offsets[1])
    twice = np.concatenate([first, first, np.arange(data.offsets[1], len(data.price))])
    products = np.repeat(np.array(["twin a", "twin b"] + [f"item {i}" for i in range(1, 12)], dtype=object),
                         np.concatenate([[data.counts[0]] * 2, data.counts[1:]]))
    same = fitcore.from_columns({"product": products}, data.price[twice], data.volume[twice])
    results = fitcore.fit_batch(same)
    write_results(results, tmp_path / "r.parquet", diagnose(results))
    stored, _ = stored_results(tmp_path / "r.parquet")
    assert results.data.fingerprints[0] == results.data.fingerprints[1]  # the case in question
    assert stored.data.fingerprints.to_pylist() == results.data.fingerprints
    assert stored.data.keys["product"].to_pylist() == results.data.keys["product"].tolist()


def test_opening_results_and_their_keys_imports_no_arrow_compute(tmp_path):
    """``pyarrow.compute`` costs 0.1 s to import; the list of a results file pricefold wrote needs none of it."""
    results = fitcore.fit_batch(random_dataset(4, n_series=5))
    write_results(results, tmp_path / "r.parquet", diagnose(results))
    code = ("import sys; from fitcore.results.stored import stored_results; from fitcore.data.keys import SeriesKeys; "
            f"results, flags = stored_results({str(tmp_path / 'r.parquet')!r}, later=True); "
            "keys = SeriesKeys.of(results.data); flags.attention_order(); "
            "print('pyarrow.compute' in sys.modules, keys.label(0))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.split() == ["False", "item", "0000"]


def test_a_script_that_opens_results_and_ends_at_once_ends_cleanly(tmp_path):
    """The thread that reads the candidates' numbers starts with the opening; a process ending before that
    thread is inside Arrow's read (still opening the file) was not waited for, and died by SIGABRT (Arrow's
    C++ ended under it) in about half of such runs."""
    results = fitcore.fit_batch(random_dataset(4, n_series=5))
    write_results(results, tmp_path / "r.parquet", diagnose(results))
    code = ("from fitcore.results.stored import stored_results; "
            f"stored_results({str(tmp_path / 'r.parquet')!r}, later=True)")
    for _ in range(4):
        run = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60)
        assert (run.returncode, run.stderr) == (0, "")


def test_damaged_flags_texts_that_would_join_into_valid_json_are_refused(tmp_path):
    """Two damaged texts that, joined with a comma between them, would make valid JSON (a bracket too many in
    one, too few in the next): still the first one's row, never its flags given to its neighbour."""
    results = fitcore.fit_batch(random_dataset(47, n_series=6))
    write_results(results, tmp_path / "r.parquet", diagnose(results))
    n_c = len(results.candidates)
    texts = {1: '[{"code": "rising", "message": "x"}], [{"code": "weak-fit"', 2: '"message": "y"}]'}
    _rewritten(tmp_path / "r.parquet", tmp_path / "bad.parquet",
               flags=lambda column: [texts.get(r // n_c, t) for r, t in enumerate(column)])
    with pytest.raises(DataError, match=rf"row {n_c + 1}, column 'flags'"):
        stored_results(tmp_path / "bad.parquet")


def test_keys_whose_values_repeat_across_series_open_without_arrow_compute(tmp_path):
    """A segment's values repeat across series (its dictionary is not one entry a series): each series' key is
    still its own, as the fit holds it, and taking them needs no ``pyarrow.compute`` (0.1 s before the list)."""
    data = random_dataset(48, n_series=24)
    counts = data.counts
    product = np.repeat(np.array([f"item {s // 3}" for s in range(24)], dtype=object), counts)
    region = np.repeat(np.array(["north", "süd", "咖啡 east"] * 8, dtype=object), counts)
    results = fitcore.fit_batch(fitcore.from_columns({"product": product, "region": region}, data.price, data.volume))
    write_results(results, tmp_path / "r.parquet", diagnose(results))
    _rewritten(tmp_path / "r.parquet", tmp_path / "split.parquet", row_group_size=40)  # dictionaries by row group
    code = ("import sys, json; from fitcore.results.stored import stored_results; "
            f"results, _ = stored_results({str(tmp_path / 'split.parquet')!r}, later=True); "
            "print(json.dumps(['pyarrow.compute' in sys.modules, results.data.keys['product'].to_pylist(), "
            "results.data.keys['region'].to_pylist()]))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    imported, products, regions = json.loads(out)
    assert products == results.data.keys["product"].tolist() and regions == results.data.keys["region"].tolist()
    assert len(set(regions)) == 3 and not imported


def test_flags_texts_are_parsed_by_orjson_and_by_json_only_where_orjson_refuses(tmp_path, monkeypatch):
    """The distinct flags texts are parsed before the list; orjson reads them (3× faster), Python's ``json`` —
    the reference for what a text means — only those orjson refuses (here a NaN among a flag's numbers), and
    every series' flags are still the diagnosis that wrote the file."""
    import fitcore.results.stored as stored_module
    data = random_dataset(49, n_series=30, n_range=(3, 30))
    results = fitcore.fit_batch(data, plan_price=data.price[data.offsets[:-1]] * 1.05)
    diagnosis = diagnose(results)
    write_results(results, tmp_path / "r.parquet", diagnosis)
    flagged = next(t for t in pq.read_table(tmp_path / "r.parquet").column("flags").to_pylist() if t != "[]")
    odd = flagged.replace('"code":', '"share": NaN, "code":', 1)
    assert json.loads(odd) and odd != flagged
    _rewritten(tmp_path / "r.parquet", tmp_path / "odd.parquet", flags=lambda texts: [odd if t == flagged else t
                                                                                     for t in texts])
    texts = set(pq.read_table(tmp_path / "odd.parquet").column("flags").to_pylist())
    parsed = []
    real = json.loads

    def loads(text, *args, **kwargs):  # the header's JSON is read through json too: only flags texts counted
        if isinstance(text, str) and text in texts:
            parsed.append(text)
        return real(text, *args, **kwargs)
    monkeypatch.setattr(stored_module.json, "loads", loads)
    _, flags = stored_results(tmp_path / "odd.parquet")
    monkeypatch.undo()
    assert parsed == [odd]
    np.testing.assert_array_equal(flags.raised, diagnosis.raised)
    assert diagnosis.raised.sum() > 5
