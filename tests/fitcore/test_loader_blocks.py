"""Loading files that pyarrow reads in many blocks and row groups, checked against pandas, pyarrow and numpy.

Keys are dictionary-encoded by the readers (one small dictionary per block), never decoded; numbers are
copied block by block; the rows are grouped by sorting one integer key.  Each check's reference is named
beside it.
"""
from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from hypothesis import given
from hypothesis import settings as hsettings
from hypothesis import strategies as st

from fitcore.data.cells import categorical
from fitcore.data.dataset import _grouped
from fitcore.data.loader import Columns, load_with_rejects
from fitcore.data.validation import LARGEST, RawRows, reasons

BAD_CELLS = ["x", "-3", "", "nan", "inf", "1e16"]


def invented_rows(n: int, seed: int = 3) -> pd.DataFrame:
    """``n`` rows of interleaved series as text, some keys blank or spaced and some numbers bad."""
    rng = np.random.default_rng(seed)
    frame = pd.DataFrame({"product": np.char.add("item ", rng.integers(0, 5_000, n).astype(str)).astype(object),
                          "price": np.round(rng.uniform(1, 9, n), 2).astype(str).astype(object),
                          "volume": np.round(rng.uniform(0, 500, n), 1).astype(str).astype(object)})
    for i, at in enumerate(rng.choice(n, 600, replace=False)):
        column = ["product", "price", "volume"][i % 3]
        frame.loc[at, column] = ["", "   ", " item 7"][i % 3] if column == "product" else BAD_CELLS[i % 6]
    return frame


def expected_from(frame: pd.DataFrame, first_line: int):
    """Series (first appearance order) → [(line, price, volume)] by the documented rules, and the lines
    rejected: a key that is empty or blank, a number that is not a finite value in [0, 1e15]."""
    def number(text):
        try:
            value = float(text)
        except ValueError:
            return None
        return value if math.isfinite(value) and 0 <= value <= LARGEST else None
    series, rejected = {}, []
    for i, (key, price, volume) in enumerate(frame.itertuples(index=False)):
        values = number(price), number(volume)
        if not str(key).strip() or None in values:
            rejected.append(first_line + i)
        else:
            series.setdefault(key, []).append((first_line + i, *values))
    return series, rejected


def as_series(data):
    out = {}
    for s in range(data.n_series):
        rows = slice(data.offsets[s], data.offsets[s + 1])
        out[data.keys["product"][s]] = list(zip(data.line[rows].tolist(), data.price[rows].tolist(),
                                                data.volume[rows].tolist()))
    return out


@pytest.mark.slow
@pytest.mark.parametrize("ending", ["\n", "\r\n"])
def test_a_csv_of_many_blocks_loads_as_pandas_reads_it(tmp_path, ending):
    frame = invented_rows(150_000)
    path = tmp_path / "rows.csv"
    path.write_bytes(("product,price,volume" + ending + ending.join(
        ",".join(row) for row in frame.itertuples(index=False)) + ending).encode())
    # reference: pandas' own reader, every cell as text
    read = pd.read_csv(path, dtype=str, keep_default_na=False)
    assert read.astype(object).values.tolist() == frame.values.tolist()
    series, rejected = expected_from(read, first_line=2)
    data, rejects = load_with_rejects(path, Columns())
    assert as_series(data) == series and list(data.keys["product"]) == list(series)
    assert rejects.lines.tolist() == rejected


@pytest.mark.slow
def test_a_parquet_file_of_many_row_groups_loads_as_pyarrow_reads_it(tmp_path):
    frame = invented_rows(120_000, seed=4)
    table = pa.table({"product": pa.array(frame["product"].tolist(), pa.large_string()),
                      "price": pa.array([float(v) if v not in ("x", "") else None for v in frame["price"]]),
                      "volume": pa.array([float(v) if v not in ("x", "") else None for v in frame["volume"]])})
    path = tmp_path / "rows.parquet"
    pq.write_table(table, path, row_group_size=10_000)
    # reference: pyarrow's plain read (text decoded), rules applied row by row
    read = pq.read_table(path).to_pandas().astype(object)
    read[["price", "volume"]] = read[["price", "volume"]].map(lambda v: "" if v is None or v != v else repr(v))
    series, rejected = expected_from(read, first_line=1)
    data, rejects = load_with_rejects(path, Columns())
    assert as_series(data) == series and list(data.keys["product"]) == list(series)
    assert rejects.lines.tolist() == rejected


def dictionary_chunk(indices, dictionary):
    return pa.DictionaryArray.from_arrays(pa.array(indices, pa.int32()), pa.array(dictionary, pa.string()))


@pytest.mark.parametrize("chunks", [
    [dictionary_chunk([0, 1, 0], ["a", "b"]), dictionary_chunk([1, 0], ["c", "a"])],  # blocks' own dictionaries
    [dictionary_chunk([0, 2, 1], ["a", "b", "a"])],  # a dictionary repeating a value
    [dictionary_chunk([0, None, 1], ["b", " "]), dictionary_chunk([None, None], [])],  # nulls, an empty dictionary
    [dictionary_chunk([0, 1, 2], ["a", None, "b"])],  # a null inside the dictionary
    [dictionary_chunk([], []), dictionary_chunk([0, 0], ["z"])],  # an empty block
])
def test_dictionary_keys_are_their_decoded_values(chunks):
    column = pa.chunked_array(chunks)
    decoded = column.cast(pa.string()).to_pylist()  # reference: pyarrow's own decoding
    found = categorical(column)
    assert [None if v != v else v for v in np.asarray(found, dtype=object)] == decoded
    assert len(set(found.categories)) == len(found.categories)


@given(st.lists(st.integers(-1, 40), max_size=300))
@hsettings(max_examples=80, deadline=None)
def test_grouping_is_numpys_stable_sort(codes):
    codes = np.asarray(codes, dtype=np.int64)
    order, grouped = _grouped(codes.copy())
    expected = np.argsort(codes, kind="stable")  # reference: numpy's stable argsort
    assert order.tolist() == expected.tolist() and grouped.tolist() == codes[expected].tolist()


NUMBERS = st.sampled_from([1.0, 0.0, 2.5, -1.0, math.nan, math.inf, -math.inf, 2e15, -2e15, 1e15])


@given(st.lists(st.tuples(st.sampled_from(["a", "b", " ", "", None]), NUMBERS, NUMBERS, NUMBERS,
                          st.booleans(), st.booleans()), min_size=1, max_size=30))
@hsettings(max_examples=150, deadline=None)
def test_reasons_follow_the_documented_order(rows):
    """Each row's reason is the first of the module's rules that applies (a plain loop over the rules here),
    whether or not the column checks leave it in doubt."""
    keys, prices, volumes, controls, text, empty = zip(*rows)
    missing = np.array(empty) & np.isnan(prices)
    raw = RawRows(line=np.arange(2, len(rows) + 2), keys={"product": pd.Categorical(list(keys))},
                  numbers={"price": (np.array(prices), np.array(text) & np.isnan(prices) & ~missing, missing),
                           "volume": (np.array(volumes), np.zeros(len(rows), bool), np.zeros(len(rows), bool)),
                           "promo": (np.array(controls), np.zeros(len(rows), bool), np.zeros(len(rows), bool))})
    why, usable = reasons(raw, "price", "volume", None, None, controls=("promo",))

    def first_reason(key, price, volume, control, not_number, is_missing):
        if key is None or not key.strip():
            return "empty product"
        for name, value, signed in (("price", price, False), ("volume", volume, False), ("promo", control, True)):
            if name == "price" and not_number:
                return "non-numeric price"
            if name == "price" and is_missing:
                return "missing price"
            if not math.isfinite(value):
                return f"non-finite {name}"
            if abs(value) > LARGEST:
                return f"{name} beyond ±1e15"
            if not signed and value < 0:
                return f"negative {name}"
        return None
    expected = [first_reason(k, p, v, c, t, m) for k, p, v, c, t, m in
                zip(keys, prices, volumes, controls, raw.numbers["price"][1], missing)]
    assert list(why) == expected and usable.tolist() == [r is None for r in expected]


@pytest.mark.parametrize("block", [1, 7, 1 << 19])
def test_fingerprints_hash_each_series_rows_of_the_stacked_columns(monkeypatch, block):
    import hashlib

    import fitcore.data.dataset as dataset
    monkeypatch.setattr(dataset, "FINGERPRINT_ROWS", block)
    rng = np.random.default_rng(5)
    n = 400
    product = rng.integers(0, 30, n).astype(str).astype(object)
    date = np.datetime64("2020-01-01", "ns") + rng.integers(0, 10**15, n).astype("timedelta64[ns]")
    data = dataset.from_columns({"product": product}, rng.uniform(1, 2, n), rng.uniform(0, 9, n),
                                weight=rng.uniform(0.5, 1, n), date=date, controls={"promo": rng.integers(0, 2, n)})
    # reference: hashlib over numpy's row-major stack of the whole table, each series' rows in date order
    table = np.column_stack([data.price, data.volume, data.weight, data.date.view(np.int64), data.controls["promo"]])
    expected = [hashlib.sha256(np.ascontiguousarray(table[lo:hi][np.argsort(data.date[lo:hi], kind="stable")])
                               .tobytes()).hexdigest() for lo, hi in zip(data.offsets[:-1], data.offsets[1:])]
    assert data.fingerprints == expected
    assert data.fingerprint_texts.type == pa.string() and data.fingerprint_texts.to_pylist() == expected


@given(st.lists(st.integers(0, 6), min_size=1, max_size=40), st.integers(0, 3))
@hsettings(max_examples=300, deadline=None)
def test_series_codes_number_keys_by_first_appearance_as_pandas_factorize(values, unused):
    """A key read as a Categorical: its codes kept as they are only where pandas' ``factorize`` would give
    the same numbers (reference: ``pandas.factorize(sort=False)`` of the key texts); categories no row
    uses (``unused``) change nothing."""
    from fitcore.data.dataset import _series_codes, in_first_appearance_order
    categories = [f"k{i}" for i in range(max(values) + 1 + unused)]
    column = pd.Categorical.from_codes(values, categories=categories)
    expected, _ = pd.factorize(np.array([categories[v] for v in values], dtype=object), sort=False)
    assert _series_codes([column]).tolist() == expected.tolist()
    for dtype in (np.int64, np.int32, np.int8):  # the readers' codes are int32, a Categorical's int8 here
        assert in_first_appearance_order(np.asarray(values, dtype)) == (expected.tolist() == values)


@pytest.mark.parametrize("texts", [
    [["2025-01-06", "2025-01-13", None], ["2025-01-13", "", "9999-12-31"]],  # dates cast at once
    [["2025-01-06", "not a date", " "], [None, "2025-02-30", "2025-01-06T12:00:00+02:00"]],  # parsed one by one
])
def test_dictionary_dates_are_the_dates_of_their_decoded_text(texts):
    from fitcore.data.cells import dates
    column = pa.chunked_array([pa.array(chunk).dictionary_encode() for chunk in texts])
    decoded = column.cast(pa.string())  # reference: pyarrow's own decoding, read as plain text
    for found, expected in zip(dates(column), dates(decoded)):
        assert found.dtype == expected.dtype and found.tolist() == expected.tolist()
    no_date = ("", "not a date", "2025-02-30", "9999-12-31")
    assert np.isnat(dates(column)[0]).tolist() == [v is None or v.strip() in no_date for v in sum(texts, [])]


def test_a_parquet_key_that_is_not_utf8_is_one_line_naming_file_and_column(tmp_path):
    from fitcore.errors import DataError
    path = tmp_path / "bytes.parquet"
    pq.write_table(pa.table({"product": pa.array([b"caf\xe9", b"tea"] * 5), "price": [1.0, 2.0] * 5,
                             "volume": [3.0, 4.0] * 5}), path)
    with pytest.raises(DataError) as caught:
        load_with_rejects(path, Columns())
    assert str(path) in str(caught.value) and "'product'" in str(caught.value) and "UTF-8" in str(caught.value)
    assert "\n" not in str(caught.value)


def test_one_cell_that_is_not_a_number_keeps_the_fast_reader_and_its_numbers(tmp_path, monkeypatch):
    """A file of several blocks with one cell that is not a number: read again with the numbers as text,
    block by block — not line by line — and loaded exactly as the line-by-line reader loads it (blanks
    around a number, spelled infinities, empty cells included).  Reference values: Python's ``float``."""
    from fitcore.data import read_csv
    frame = invented_rows(60_000)
    frame.loc[10, "price"], frame.loc[20, "volume"], frame.loc[30, "price"] = " 4.5 ", "Inf", "1e400"
    frame.loc[59_990, "volume"] = "abc"  # in the last block only
    path = tmp_path / "rows.csv"
    path.write_text("product,price,volume\n" + "\n".join(",".join(row) for row in frame.itertuples(index=False))
                    + "\n")
    series, rejected = expected_from(pd.read_csv(path, dtype=str, keep_default_na=False), first_line=2)
    slow = read_csv._read_slow
    monkeypatch.setattr(read_csv, "_read_slow", lambda *a: pytest.fail("read line by line"))
    data, rejects = load_with_rejects(path, Columns())
    assert as_series(data) == series and rejects.lines.tolist() == rejected
    assert data.price[np.flatnonzero(data.line == 12)].tolist() == [4.5]
    monkeypatch.setattr(read_csv, "_read_slow", slow)
    monkeypatch.setattr(read_csv, "_read_fast", lambda *a: None)
    by_lines, rejects_by_lines = load_with_rejects(path, Columns())
    assert as_series(by_lines) == as_series(data)
    assert rejects_by_lines.lines.tolist() == rejects.lines.tolist()
    assert rejects_by_lines.reasons == rejects.reasons
