"""Reading data: every rejection reason, every file-level error, formats, and a fuzz test."""
from __future__ import annotations

import bz2
import csv
import gzip
import io
import lzma
import math
import re
import zipfile

import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from hypothesis import HealthCheck, given
from hypothesis import settings as hsettings
from hypothesis import strategies as st

from fitcore.data.loader import Columns, load, load_with_rejects
from fitcore.data.rejects import write_rejects
from fitcore.errors import DataError

GOOD = [("a", "1.00", "30", "2025-01-06"), ("a", "1.20", "25", "2025-01-13"), ("b", "2.00", "10", "2025-01-06")]


def write(path, rows, header=("product", "price", "volume", "week"), sep=","):
    with open(path, "w", newline="", encoding="utf-8") as handle:
        handle.write(sep.join(header) + "\n")
        for row in rows:
            handle.write(row if isinstance(row, str) else sep.join(row))
            handle.write("\n")
    return path


@pytest.mark.parametrize("bad, reason", [
    ("", "empty line"),
    ("a,1.5,20,2025-01-20,extra", "expected 4 fields, found 5"),
    (",1.5,20,2025-01-20", "empty product"),
    ("a,,20,2025-01-20", "missing price"),
    ("a,1.5,,2025-01-20", "missing volume"),
    ("a,abc,20,2025-01-20", "non-numeric price"),
    ("a,1.5,lots,2025-01-20", "non-numeric volume"),
    ("a,nan,20,2025-01-20", "non-finite price"),
    ("a,1.5,inf,2025-01-20", "non-finite volume"),
    ("a,-1.5,20,2025-01-20", "negative price"),
    ("a,1.5,-20,2025-01-20", "negative volume"),
    ("a,1.5,20,not a date", "unparseable week"),
    ("a,1.5,20,", "missing week"),
    ("a,1.7,22,2025-01-13", "duplicate of line 3 (same series and date)"),
])
def test_each_rejection_reason_names_its_line(tmp_path, bad, reason):
    path = write(tmp_path / "d.csv", [*GOOD, bad])
    data, rejects = load_with_rejects(path, Columns(date="week"))
    assert rejects.lines.tolist() == [5] and rejects.reasons == [reason]
    assert data.n_rows == 3 and data.source["rows"] == 4 and data.source["rejected"] == 1
    assert sorted(data.line.tolist()) == [2, 3, 4]


def test_weight_reasons(tmp_path):
    rows = [("a", "1.0", "3", "1"), ("a", "1.1", "3", "-1"), ("a", "1.2", "3", "x"), ("a", "1.3", "3", "")]
    path = write(tmp_path / "w.csv", rows, header=("product", "price", "volume", "w"))
    _, rejects = load_with_rejects(path, Columns(weight="w"))
    assert dict(zip(rejects.lines.tolist(), rejects.reasons)) == {3: "negative w", 4: "non-numeric w", 5: "missing w"}


def test_rejects_file_holds_the_original_cells(tmp_path):
    path = write(tmp_path / "d.csv", [*GOOD, "a,1.5,lots,2025-01-20", '"b, the second",1,2,2025-01-27'])
    _, rejects = load_with_rejects(path, Columns(date="week"))
    buffer = io.BytesIO()
    write_rejects(rejects, buffer)
    rows = list(csv.reader(io.StringIO(buffer.getvalue().decode())))
    assert rows == [["product", "price", "volume", "week", "line", "reason"],
                    ["a", "1.5", "lots", "2025-01-20", "5", "non-numeric volume"]]


def zipped(content: bytes) -> bytes:
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w") as archive:
        archive.writestr("d.csv", content)
    return buffer.getvalue()


@pytest.mark.parametrize("content, message", [
    (None, "file not found"),
    (b"", "the file is empty"),
    (b"product,price,volume\n", "expected at least one observation, found only a header"),
    (b"product,prcie,volume\na,1,2\n", "expected a column 'price', found 'product', 'prcie', 'volume'; did you mean 'prcie'?"),
    (b"product,plan_price\na,1\n", "it reads like a plan file (a 'plan_price' column, no volume): give it with --plan"),
    (b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR", "binary file"),
    ("product,price,volume\na,1,2\n".encode("utf-16"), "this is UTF-16 text (its byte-order mark says so): save it as UTF-8"),
    (b"product,price,volume\na,1,2\na,1\x00,2\n", "line 3 holds a NUL byte (0x00)"),
    (b"product,price,volume\n\xff\xfe\xfa,1,2\n" * 3, "not UTF-8"),
    # other compressions by their magic numbers (bz2, lzma, zipfile of the standard library wrote them)
    (bz2.compress(b"product,price,volume\na,1,2\n"), "this is bzip2-compressed: decompress it first (bunzip2 FILE)"),
    (lzma.compress(b"product,price,volume\na,1,2\n"), "this is xz-compressed: decompress it first (unxz FILE)"),
    (zipped(b"product,price,volume\na,1,2\n"), "this is zip-compressed: decompress it first (unzip FILE)"),
])
def test_file_level_errors_are_one_clear_line(tmp_path, content, message):
    path = tmp_path / "d.csv"
    if content is not None:
        path.write_bytes(content)
    with pytest.raises(DataError, match=re.escape(message)) as info:
        load(path)
    assert "d.csv" in str(info.value) and "\n" not in str(info.value)


def test_unknown_extension(tmp_path):
    path = tmp_path / "d.xlsx"
    path.write_bytes(b"PK")
    with pytest.raises(DataError, match=r"expected a \.csv, \.tsv, \.txt \(optionally \.gz\) or \.parquet file, "
                                        r"got 'd\.xlsx'$"):
        load(path)
    for name, packed in (("d.csv.bz2", "bzip2"), ("d.csv.xz", "xz"), ("d.zip", "zip")):  # named so: said too
        (tmp_path / name).write_bytes(b"\x00")
        with pytest.raises(DataError, match=rf"{re.escape(name)}'; {packed}-compressed: decompress it first \(only "
                                            r"gzip is read\)"):
            load(tmp_path / name)
    results = tmp_path / "r.json"  # a results file given as data (a trial): said what it is
    results.write_text('{"schema":"pricefold-results/1"}')
    with pytest.raises(DataError, match=r"got 'r\.json'; \.json is pricefold's results format, not a data format \(a "
                                        r"results file is read with 'pricefold show' or 'pricefold triage'\)"):
        load(results)


def test_every_row_rejected_is_an_error(tmp_path):
    path = write(tmp_path / "d.csv", ["a,-1,2,2025-01-06", "b,x,2,2025-01-06"])
    with pytest.raises(DataError, match=re.escape("no usable rows (2 rows rejected: 1 negative price · 1 non-numeric price)")):
        load(path, Columns(date="week"))


def expected_frame():
    return {"a": [(1.0, 30.0), (1.2, 25.0)], "b": [(2.0, 10.0)]}


def as_frame(data):
    return {data.keys["product"][s]: list(zip(data.price[data.offsets[s]:data.offsets[s + 1]].tolist(),
                                              data.volume[data.offsets[s]:data.offsets[s + 1]].tolist()))
            for s in range(data.n_series)}


@pytest.mark.parametrize("name, sep, compress", [("d.csv", ",", False), ("d.tsv", "\t", False),
                                                 ("d.csv.gz", ",", True), ("d.txt", ";", False)])
def test_text_formats_and_delimiters(tmp_path, name, sep, compress):
    text = io.StringIO()
    text.write(sep.join(["product", "price", "volume"]) + "\n")
    for row in GOOD:
        text.write(sep.join(row[:3]) + "\n")
    path = tmp_path / name
    payload = text.getvalue().encode()
    path.write_bytes(gzip.compress(payload) if compress else payload)
    assert as_frame(load(path)) == expected_frame()


def test_parquet_file_and_folder(tmp_path):
    table = pa.table({"product": ["a", "b", "a"], "price": [1.0, 2.0, 1.2], "volume": [30.0, 10.0, 25.0]})
    pq.write_table(table, tmp_path / "d.parquet")
    assert as_frame(load(tmp_path / "d.parquet")) == expected_frame()
    folder = tmp_path / "parts"
    folder.mkdir()
    pq.write_table(table.slice(0, 2), folder / "part-0.parquet")
    pq.write_table(table.slice(2, 1), folder / "part-1.parquet")
    assert as_frame(load(folder)) == expected_frame()


def test_a_folders_parts_each_have_its_columns_and_nothing_else_lies_beside_them(tmp_path):
    """A trial's folder: a part without 'volume' had its every row rejected as missing volume (exit 0); a
    readme.txt beside the parts failed the read in pyarrow's words, naming no file.  A partitioned folder
    (``product=a/…``, the column in the folder names) is read as before."""
    table = pa.table({"product": ["a", "b", "a"], "price": [1.0, 2.0, 1.2], "volume": [30.0, 10.0, 25.0]})
    folder = tmp_path / "parts"
    folder.mkdir()
    pq.write_table(table.slice(0, 2), folder / "part-0.parquet")
    pq.write_table(table.slice(2, 1).drop_columns(["volume"]), folder / "part-1.parquet")
    with pytest.raises(DataError, match=r"parts: its part part-1.parquet has no column 'volume', which the folder's "
                                        r"other parts have: every part needs the same columns"):
        load(folder)
    pq.write_table(table.slice(2, 1), folder / "part-1.parquet")
    (folder / "readme.txt").write_text("from the warehouse export\n")
    with pytest.raises(DataError, match=r"parts: holds readme.txt, which is not a readable Parquet file \(.*\); a "
                                        r"data folder holds only its Parquet parts"):
        load(folder)
    (folder / "readme.txt").unlink()
    assert as_frame(load(folder)) == expected_frame()
    hive = tmp_path / "hive"
    for product in ("a", "b"):
        (hive / f"product={product}").mkdir(parents=True)
        rows = table.filter(pa.compute.equal(table["product"], product)).drop_columns(["product"])
        pq.write_table(rows, hive / f"product={product}" / "part.parquet")
    assert as_frame(load(hive)) == expected_frame()
    # folder names are text as written: 007, 07 and 7 are three stores (inferred as numbers they were one, 7)
    stores = tmp_path / "stores"
    for store in ("007", "07", "7"):
        (stores / f"store={store}").mkdir(parents=True)
        pq.write_table(table, stores / f"store={store}" / "part.parquet")
    for written in ("North East", "North%20East", "__HIVE_DEFAULT_PARTITION__"):  # not URL-decoded, never null
        (stores / f"store={written}").mkdir(parents=True)
        pq.write_table(table, stores / f"store={written}" / "part.parquet")
    data = load(stores, Columns(segments=("store",)))
    assert sorted(set(data.keys["store"])) == ["007", "07", "7", "North East", "North%20East",
                                               "__HIVE_DEFAULT_PARTITION__"] and data.n_series == 12
    # a part that also holds the folder names' column: one line (Arrow's merge error was a traceback)
    (stores / "store=7" / "part.parquet").unlink()
    pq.write_table(table.append_column("store", pa.array(["7"] * 3)), stores / "store=7" / "part.parquet")
    with pytest.raises(DataError, match=r"stores: its part store=7/part.parquet holds the column 'store' that its "
                                        r"folder's name gives too \(store=…\): keep it in the folder names or in the "
                                        r"parts, not both"):
        load(stores, Columns(segments=("store",)))
    # a note beside the parts large enough for the dataset to try it as a part (it failed in Arrow's words)
    (folder / "README.txt").write_text("x" * 5000)
    with pytest.raises(DataError, match=r"parts: holds README.txt, which is not a readable Parquet file"):
        load(folder)


def test_interleaved_series_keep_their_own_order(tmp_path):
    rows = [("a", "1.0", "30", "x"), ("b", "2.0", "10", "x"), ("a", "1.2", "25", "x")]
    data = load(write(tmp_path / "d.csv", rows))
    assert as_frame(data) == expected_frame() and data.line.tolist() == [2, 4, 3]


# -- fuzz: generated files with junk, odd encodings, blank lines and quoted delimiters ---------

CELL = st.one_of(
    st.floats(0, 1e4, allow_nan=False).map(lambda v: f"{v:.3f}"),
    st.sampled_from(["", "x", "nan", "-3", "inf", "1,5", "1e400", " 7 ", "\"2,5\"", "—", "0"]),
)
ROW = st.one_of(
    st.tuples(st.sampled_from(["p", "q", "", "r s", "ü", "\"x,y\""]), CELL, CELL),
    st.just(("",)),
    st.tuples(st.just("p"), CELL, CELL, CELL),
)


def independently_bad(fields: list[str]) -> bool:
    """Is this parsed line unusable by the documented rules (3 fields, key, two finite numbers ≥ 0)?"""
    if len(fields) != 3 or not fields[0].strip():
        return True
    for cell in fields[1:]:
        try:
            value = float(cell)
        except ValueError:
            return True
        if not math.isfinite(value) or value < 0:
            return True
    return False


@given(st.lists(ROW, min_size=1, max_size=40), st.sampled_from([",", ";", "\t"]))
@hsettings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
def test_fuzzed_files_account_for_every_row(tmp_path, rows, sep):
    path = tmp_path / "fuzz.csv"
    lines = [sep.join(["product", "price", "volume"])]
    for row in rows:
        lines.append(sep.join(cell.replace(",", sep) if cell.startswith('"') else cell for cell in row))
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    try:
        data, rejects = load_with_rejects(path, sep=sep)
    except DataError as exc:  # a whole-file problem: one line, never a traceback
        assert "\n" not in str(exc)
        return
    assert data.source["rows"] == data.n_rows + len(rejects)
    parsed = list(csv.reader(io.StringIO(path.read_text(encoding="utf-8")), delimiter=sep))
    for line in rejects.lines.tolist():
        assert independently_bad(parsed[line - 1]), (line, parsed[line - 1])
    for line in data.line.tolist():
        assert not independently_bad(parsed[line - 1]), (line, parsed[line - 1])


def test_the_rejects_summary_keeps_a_reason_holding_a_comma_in_one_piece():
    """Reasons are joined by " · ": "expected 6 fields, found 7" holds a comma of its own (and is counted as a
    noun: "1 line of 7 fields (6 expected)", not "1 expected 6 fields, found 7")."""
    from fitcore.data.validation import summary
    said = summary(["non-numeric volume", "expected 6 fields, found 7", "non-numeric volume",
                    "expected 6 fields, found 7", "expected 6 fields, found 5"])
    head, parts = said.split(": ", 1)
    assert head == "5 rows rejected"
    assert parts.split(" · ") == ["2 non-numeric volume", "2 lines of 7 fields (6 expected)",
                                  "1 line of 5 fields (6 expected)"]


def test_the_rejects_summary_counts_empty_lines_in_the_plural():
    """Before: "3 rows rejected: 3 empty line"."""
    from fitcore.data.validation import EMPTY_LINE, summary
    assert summary([EMPTY_LINE] * 3 + ["negative price"] * 2) == "5 rows rejected: 3 empty lines · 2 negative price"
    assert summary([EMPTY_LINE]) == "1 row rejected: 1 empty line"
