"""What an empty line is, in both CSV readers (pyarrow's, and the csv module's line by line) and gzip: a line with
nothing, or white space only, on it.  A line of fields whose key is empty (``,,,0``, ``"",,,``, ``,,,``) is a row
with an empty key, and a quote the last line opens and never closes — even alone — is refused."""
from __future__ import annotations

import gzip

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from fitcore.data.loader import Columns, load_with_rejects
from fitcore.errors import DataError

HEADER = "product,price,volume,note\n"
GOOD = "a,1.0,30,x\na,1.2,25,x\nb,2.0,10,x\n"
# a quoted line break in an ignored column: a row is then not a line, and the csv module reads the file
READERS = {"pyarrow": "", "csv module": 'b,2.1,9,"two\nlines"\n'}


def write(tmp_path, body: str, reader: str, gz: bool):
    text = HEADER + GOOD + READERS[reader] + body
    path = tmp_path / ("d.csv.gz" if gz else "d.csv")
    path.write_bytes(gzip.compress(text.encode()) if gz else text.encode())
    return path, HEADER.count("\n") + (GOOD + READERS[reader]).count("\n") + 1  # the body's first line


@pytest.mark.parametrize("gz", [False, True])
@pytest.mark.parametrize("reader", READERS)
@pytest.mark.parametrize("body, reasons", [
    ("\n", ["empty line"]),
    ("   \n", ["empty line"]),
    ("\t \r\n", ["empty line"]),
    (",,,0\n", ["empty product"]),  # before: 'empty line' though a cell holds 0
    ('"",,,\n', ["empty product"]),  # before: 'empty line'
    (",,,\n", ["empty product"]),  # before: 'empty line'
    (",,,\n\n   \n,1,2,\n", ["empty product", "empty line", "empty line", "empty product"]),
    ('""\n', ["expected 4 fields, found 1"]),  # a quoted empty cell is something on the line; before: 'empty line'
    ('"   "\n', ["expected 4 fields, found 1"]),
])
def test_only_a_line_with_nothing_on_it_is_an_empty_line(tmp_path, body, reasons, reader, gz):
    path, first = write(tmp_path, body, reader, gz)
    data, rejects = load_with_rejects(path, Columns())
    assert rejects.reasons == reasons and rejects.lines.tolist() == list(range(first, first + len(reasons)))
    assert data.source["rows"] == data.n_rows + len(reasons)


@pytest.mark.parametrize("gz", [False, True])
@pytest.mark.parametrize("reader", READERS)
@pytest.mark.parametrize("last", ['"\n', '"', '"   ', '"\r\n', ',,,"', 'c,1,2,"open'])
def test_a_quote_the_last_line_never_closes_is_refused_even_alone(tmp_path, last, reader, gz):
    """Before: a lone '"' (or '"' and spaces) on the last line was rejected as an empty line and the fit went on,
    its rejects row holding a quoted line feed the file never had."""
    path, first = write(tmp_path, last, reader, gz)
    with pytest.raises(DataError) as caught:
        load_with_rejects(path, Columns())
    assert str(caught.value) == (f"{path}, line {first}: a quote opens on this line, the last of the file, and is "
                                 "never closed; expected 4 fields a row")


def test_a_parquet_row_of_nulls_is_an_empty_key_and_named_by_row(tmp_path):
    """A Parquet file has no lines: a row of nulls is a row whose key is empty (before: 'empty line'); the error
    when no row is usable names the row (before: 'line 2')."""
    path = tmp_path / "d.parquet"
    pq.write_table(pa.table({"product": ["a", None, "a"], "price": [1.0, None, 2.0], "volume": [3.0, None, 2.0]}),
                   path)
    _, rejects = load_with_rejects(path, Columns())
    assert rejects.reasons == ["empty product"] and rejects.lines.tolist() == [2]
    pq.write_table(pa.table({"product": ["a", "b"], "price": [-1.0, 1.0], "volume": [3.0, -2.0]}), path)
    with pytest.raises(DataError) as caught:
        load_with_rejects(path, Columns())
    assert str(caught.value).startswith(f"{path}, row 1, column 'price': no usable rows")


@pytest.mark.parametrize("reader", READERS)
def test_a_tsv_line_of_tabs_alone_is_a_row_when_it_has_the_fields(tmp_path, reader):
    """A tab is white space and the delimiter: a line of the header's fields, all empty, is a row (its key empty) in
    both readers; one of fewer, white space only, is an empty line."""
    text = (HEADER + GOOD + READERS[reader] + "\t\t\t\n \t \n").replace(",", "\t")
    path = tmp_path / "d.tsv"
    path.write_text(text, encoding="utf-8")
    _, rejects = load_with_rejects(path, Columns())
    assert rejects.reasons == ["empty product", "empty line"]
