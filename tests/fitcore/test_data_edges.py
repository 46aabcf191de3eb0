"""Data at the edges: dates the ns type cannot hold, UTC offsets, byte-order marks, sniffed delimiters,
gzip by its magic bytes, duplicate headers, and series whose weights leave nothing to fit."""
from __future__ import annotations

import gzip

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

import fitcore
from fitcore.data.loader import Columns, load, load_with_rejects
from fitcore.errors import DataError
from fitcore.fit import reasons as R
from fitcore.review.flags import diagnose

ROWS = [f"a,{1 + i / 10:.1f},{30 - i},2025-01-{1 + i:02d}" for i in range(14)]


def csv_file(path, rows, header="product,price,volume,week", eol="\n"):
    path.write_bytes((eol.join([header, *rows]) + eol).encode())
    return path


@pytest.mark.parametrize("value, usable", [("9999-12-31", False), ("1500-01-01", False), ("1677-09-21", False),
                                           ("2262-04-12", False), ("1677-09-22", True), ("2262-04-11", True)])
def test_dates_outside_datetime64_ns_are_rejected_not_wrapped(tmp_path, value, usable):
    rows = [*ROWS[:13], f"a,2.5,10,{value}"]
    data, rejects = load_with_rejects(csv_file(tmp_path / "d.csv", rows), Columns(date="week"))
    if usable:
        assert len(rejects) == 0 and np.datetime64(value, "ns") in data.date
    else:
        assert rejects.lines.tolist() == [15] and rejects.reasons == ["week outside 1677-09-22 to 2262-04-11"]
        assert data.date.min() >= np.datetime64("2025-01-01")  # nothing wrapped into the data


def test_parquet_dates_outside_the_range_are_rejected(tmp_path):
    import datetime
    table = pa.table({"product": ["a"] * 3, "price": [1.0, 2.0, 3.0], "volume": [3.0, 2.0, 1.0],
                      "week": pa.array([datetime.date(2025, 1, 6), datetime.date(9999, 12, 31),
                                        datetime.date(2025, 1, 13)], pa.date32())})
    pq.write_table(table, tmp_path / "d.parquet")
    data, rejects = load_with_rejects(tmp_path / "d.parquet", Columns(date="week"))
    assert rejects.lines.tolist() == [2] and data.date.tolist() == [np.datetime64("2025-01-06", "ns").item(),
                                                                     np.datetime64("2025-01-13", "ns").item()]


def test_utc_offsets_are_converted_and_a_bad_date_is_one_rejected_row(tmp_path):
    rows = ["a,1.0,30,2025-01-06T00:00:00+01:00", "a,1.1,29,2025-01-06T00:00:00-05:00", "a,1.2,28,2025-13-45",
            "a,1.3,27,2025-01-07T00:00:00Z"]
    data, rejects = load_with_rejects(csv_file(tmp_path / "d.csv", rows), Columns(date="week"))
    assert rejects.reasons == ["unparseable week"] and rejects.lines.tolist() == [4]
    assert data.date.tolist() == [np.datetime64("2025-01-05T23:00", "ns").item(),
                                  np.datetime64("2025-01-06T05:00", "ns").item(),
                                  np.datetime64("2025-01-07T00:00", "ns").item()]


@pytest.mark.parametrize("name, sep, bom, compressed", [
    ("d.csv", ";", False, False), ("d.csv", "\t", False, False), ("d.csv", "|", True, False),
    ("d.tsv", ",", False, False), ("d.csv", ",", True, True), ("d.csv.gz", ",", False, False),
])
def test_valid_files_are_read_whatever_their_name_promised(tmp_path, name, sep, bom, compressed):
    text = "\n".join(line.replace(",", sep) for line in ["product,price,volume,week", *ROWS]) + "\n"
    payload = (b"\xef\xbb\xbf" if bom else b"") + text.encode()
    path = tmp_path / name
    path.write_bytes(gzip.compress(payload) if compressed else payload)
    data = load(path, Columns(date="week"))
    assert data.n_rows == 14 and data.keys["product"].tolist() == ["a"]


def test_duplicate_header_names_are_an_error_naming_both_places(tmp_path):
    path = csv_file(tmp_path / "d.csv", [r + ",9" for r in ROWS], header="product,price,volume,week,price")
    with pytest.raises(DataError, match=r"line 1, column 'price': the column 'price' appears twice in the header "
                                        r"\(fields 2 and 5\)"):
        load(path)


def test_a_truncated_gzip_file_is_one_line(tmp_path):
    text = ("product,price,volume\n" + "".join(f"p{i % 97},{1 + i % 13},{i}\n" for i in range(20000))).encode()
    packed = gzip.compress(text)
    path = tmp_path / "d.csv.gz"
    path.write_bytes(packed[: len(packed) // 2])
    with pytest.raises(DataError, match="the compressed file is cut short") as info:
        load(path)
    assert "\n" not in str(info.value)


@pytest.mark.parametrize("weights, code, words", [
    (np.zeros(20), R.NO_WEIGHT, "weighs zero"),
    (np.full(20, 1e308), R.WEIGHT_OVERFLOW, "too large"),
])
def test_a_series_its_weights_leave_nothing_to_fit_gets_a_true_reason_and_a_stop_flag(weights, code, words):
    rng = np.random.default_rng(3)
    price = np.r_[np.linspace(1, 3, 20), np.linspace(1, 3, 20)]
    volume = 100 - 20 * price + rng.normal(0, 1, 40)
    keys = {"product": np.array(["weightless"] * 20 + ["fine"] * 20, dtype=object)}
    data = fitcore.from_columns(keys, price, volume, weight=np.r_[weights, np.ones(20)])
    results = fitcore.fit_batch(data)
    diagnosis = diagnose(results)
    s = list(data.keys["product"]).index("weightless")
    assert (results.reason[s] == code).all() and results.chosen[s] == -1
    assert words in results.reason_text(s, 1) and "cannot pin down" not in results.reason_text(s, 1)
    few = [f for f in diagnosis.flags_of(s) if f["code"] == "few-points"]
    assert few and few[0]["severity"] == "stop" and words in few[0]["message"]
    other = 1 - s
    assert results.chosen[other] >= 0 and not diagnosis.flagged("few-points")[other]


def test_pyarrows_reader_is_handed_no_python_object(tmp_path, monkeypatch):
    """A Python callback or file object held by pyarrow's reader threads was released after a failed read,
    while the interpreter was exiting, and aborted the process (exit 134, about 1 run in 20 under load;
    ``tests/hostile/repeat_exit.py`` counts it).  Native streams and no row handler leave nothing to release."""
    from pyarrow import csv as arrow_csv
    seen = []
    real = arrow_csv.read_csv

    def watch(source, parse_options=None, **kw):
        seen.append((source, parse_options))
        return real(source, parse_options=parse_options, **kw)

    monkeypatch.setattr(arrow_csv, "read_csv", watch)
    load_with_rejects(csv_file(tmp_path / "d.csv", [*ROWS, "a,2.5,lots,2025-02-01"]), Columns(date="week"))
    load(csv_file(tmp_path / "e.csv", ROWS), Columns(date="week"))
    assert len(seen) == 3  # the first file twice: "lots" fails the numbers, which are read again as text
    for source, options in seen:
        assert isinstance(source, pa.NativeFile) and options.invalid_row_handler is None
