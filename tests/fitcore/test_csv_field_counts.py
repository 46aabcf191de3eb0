"""Lines with the wrong number of fields: read around by pyarrow, not line by line, with the same answer.

Each file is loaded twice — by the reader pyarrow's refusal now leads to (the line-by-line reader made to
fail if called) and by the line-by-line reader alone — and the two must give the same rows, reasons,
dataset and rejects file, byte for byte.  The outside reference is Python's csv module read directly:
which lines it splits into a record of the wrong length (and how many fields), which it finds empty,
and the cells of the rest; line ends are compared with ``io.TextIOWrapper(newline="")``.
"""
from __future__ import annotations

import csv
import gzip
import io
import math

import numpy as np
import pyarrow as pa
import pytest
from hypothesis import given
from hypothesis import settings as hsettings
from hypothesis import strategies as st

from fitcore.data import read_csv
from fitcore.data.loader import Columns, load_with_rejects, read_rows
from fitcore.data.rejects import write_rejects
from fitcore.errors import DataError

HEADER = "product,price,volume,note"
GOOD = [f"{'ab'[i % 2]},{1 + i / 10:.1f},{40 - i},n{i}" for i in range(16)]


def data_file(path, lines, *, eol="\n", last_eol=True, bom=False, gz=False, header=HEADER, sep=","):
    text = eol.join(line.replace(",", sep) for line in [header, *lines]) + (eol if last_eol else "")
    raw = (b"\xef\xbb\xbf" if bom else b"") + text.encode()
    path.write_bytes(gzip.compress(raw) if gz else raw)
    return path


def outcome(path, columns: Columns):
    """What one reader makes of ``path``: its rows, and the dataset, rejects and rejects file of a load
    (or the load's one-line error)."""
    rows = read_rows(path, columns)[0]
    try:
        data, rejects = load_with_rejects(path, columns)
    except DataError as exc:
        return rows, str(exc), None, None
    written = io.BytesIO()
    write_rejects(rejects, written)
    return rows, series_of(data), (rejects.lines.tolist(), rejects.reasons), written.getvalue()


def series_of(data) -> dict:
    out = {}
    for s in range(data.n_series):
        at = slice(data.offsets[s], data.offsets[s + 1])
        columns = [data.line[at], data.price[at], data.volume[at], *([data.date[at]] if data.date is not None else [])]
        out[tuple(data.key_of(s).values())] = list(zip(*(column.tolist() for column in columns)))
    return out


def same_rows(a, b) -> None:
    assert a.line.tolist() == b.line.tolist() and a.broken == b.broken
    # an empty key cell: a null from pyarrow, "" from the csv module (as for any file; both are "empty")
    texts = lambda values: [None if code < 0 or values.categories[code] == "" else values.categories[code]  # noqa: E731
                            for code in values.codes]
    for name in a.keys:
        assert texts(a.keys[name]) == texts(b.keys[name])
    assert list(a.numbers) == list(b.numbers)
    for name in a.numbers:
        for x, y in zip(a.numbers[name], b.numbers[name]):
            assert x.dtype == y.dtype and np.array_equal(x, y, equal_nan=x.dtype.kind == "f")
    assert (a.date is None) == (b.date is None)
    for x, y in zip(a.date or (), b.date or ()):
        assert x.dtype == y.dtype and np.array_equal(x, y, equal_nan=x.dtype.kind == "M")


def both_readers(path, columns, monkeypatch):
    """(around, by_lines): ``outcome`` with the line-by-line reader refused, then with it alone."""
    slow = read_csv._read_slow
    monkeypatch.setattr(read_csv, "_read_slow", lambda *a: pytest.fail("read line by line"))
    around = outcome(path, columns)
    monkeypatch.setattr(read_csv, "_read_slow", slow)
    monkeypatch.setattr(read_csv, "_read_fast", lambda *a: None)
    by_lines = outcome(path, columns)
    monkeypatch.undo()
    return around, by_lines


def by_csv_module(path, delimiter=","):
    """Reference: Python's csv module on the decoded text, {line: record} of every data line."""
    raw = path.read_bytes()
    raw = gzip.decompress(raw) if raw[:2] == b"\x1f\x8b" else raw
    reader = csv.reader(io.StringIO(raw.decode("utf-8-sig"), newline=""), delimiter=delimiter)
    width, records, end = len(next(reader)), {}, reader.line_num
    for record in reader:
        records[end + 1], end = record, reader.line_num
    return width, records


def blank_lines(path) -> set:
    """The physical lines (CRLF, CR or LF ends, as the csv module counts them) with nothing, or white space only,
    on them: a quote is something."""
    raw = path.read_bytes()
    raw = gzip.decompress(raw) if raw[:2] == b"\x1f\x8b" else raw
    lines = io.StringIO(raw.decode("utf-8-sig"), newline="").readlines()
    return {number for number, text in enumerate(lines, 1) if not text.strip()}


def check_against_csv_module(path, found, delimiter=","):
    """The reasons of field counts and empty lines (white space only too) are the csv module's; every other line
    of two good numbers and a key is kept with those numbers (``float``)."""
    width, records = by_csv_module(path, delimiter)
    blank = blank_lines(path)  # white space only: an empty line, as most readers take it
    rows, series, (lines, reasons), _ = found
    why = dict(zip(lines, reasons))
    for line, record in records.items():
        if line in blank and len(record) != width:  # (a TSV line of tabs alone, as many as the header's: a row)
            assert why[line] == "empty line"
        elif len(record) != width:
            assert why[line] == f"expected {width} fields, found {len(record)}"
        else:
            numbers = [float(cell) if cell.replace(".", "").isdigit() else math.nan for cell in record[1:3]]
            kept = [row[1:3] for row in series.get((record[0],), []) if row[0] == line]
            assert kept == ([tuple(numbers)] if record[0] and not np.isnan(numbers).any() else [])
    assert rows.n_rows == len(records)


VARIANTS = {
    "a short line": [*GOOD[:5], "a,1.5", *GOOD[5:]],
    "an extra field": [*GOOD[:5], "b,1.5,7,n,extra", *GOOD[5:]],
    "the first data line": ["a,1.5,7", *GOOD],
    "the last data line": [*GOOD, "a,1.5,7,n,x"],
    "every kind": ["b,1", *GOOD[:4], "", "   ", *GOOD[4:8], ",,,", "a,2.5,9,n,,", *GOOD[8:], "a"],
    "a number that is not one too": [*GOOD[:3], "a,x,7,n", "a,1.5", *GOOD[3:9], "b,2.5,lots,n", *GOOD[9:]],
}


@pytest.mark.parametrize("variant", list(VARIANTS))
@pytest.mark.parametrize("form", ["LF", "CRLF", "CR", "no last line end", "BOM", "gzip", "TSV"])
def test_a_line_of_the_wrong_width_is_read_around_as_the_line_by_line_reader_reads_it(
        tmp_path, monkeypatch, variant, form):
    sep = "\t" if form == "TSV" else ","
    path = data_file(tmp_path / ("d.tsv.gz" if form == "gzip" else "d.tsv" if form == "TSV" else "d.csv"),
                     VARIANTS[variant], eol={"CRLF": "\r\n", "CR": "\r"}.get(form, "\n"),
                     last_eol=form != "no last line end", bom=form == "BOM", gz=form == "gzip", sep=sep)
    around, by_lines = both_readers(path, Columns(), monkeypatch)
    same_rows(around[0], by_lines[0])
    assert around[1:] == by_lines[1:]
    check_against_csv_module(path, around, sep)


def test_dates_and_segments_of_a_file_read_around(tmp_path, monkeypatch):
    header = "product,region,price,volume,week"
    lines = [f"{'ab'[i % 2]},{'nsns'[i % 4]},{1 + i / 10:.1f},{40 - i},2025-01-{1 + i:02d}" for i in range(20)]
    lines[3], lines[11] = "a,n,1.5,7", "b,s,1.5,7,2025-02-01,x"
    lines.insert(7, "a,n,2.0,30,2025-01-03")  # a repeat of line 4's series and date
    path = data_file(tmp_path / "d.csv", lines, header=header)
    columns = Columns(segments=("region",), date="week")
    around, by_lines = both_readers(path, columns, monkeypatch)
    same_rows(around[0], by_lines[0])
    assert around[1:] == by_lines[1:]
    assert around[2][1][:2] == ["expected 5 fields, found 4", "duplicate of line 4 (same series and date)"]


def test_a_file_of_only_broken_rows_is_the_same_one_line_error(tmp_path, monkeypatch):
    path = data_file(tmp_path / "d.csv", ["a,1", "b,2,3,4,5"])
    around, by_lines = both_readers(path, Columns(), monkeypatch)
    assert around[1] == by_lines[1]
    assert str(path) in around[1] and "\n" not in around[1]
    assert ("no usable rows (2 rows rejected: 1 line of 2 fields (4 expected) · 1 line of 5 fields (4 expected)); "
            "the first is a line of 2 fields (4 expected)") in around[1]  # not "1 expected 4 fields, found 2"


@pytest.mark.parametrize("lines", [
    [*GOOD[:4], '"a",1.5', *GOOD[4:]],  # a quote: a line may be part of a row
    [*GOOD[:4], "a,1.5", *GOOD[4:8], 'b,2,3,"say ""hi"""', *GOOD[8:]],
])
def test_a_file_holding_a_quote_still_goes_line_by_line(tmp_path, monkeypatch, lines):
    path = data_file(tmp_path / "d.csv", lines)
    calls = []
    slow = read_csv._read_slow
    monkeypatch.setattr(read_csv, "_read_slow", lambda *a: calls.append(a) or slow(*a))
    rows = read_rows(path, Columns())[0]
    assert len(calls) == 1 and rows.broken == {4: "expected 4 fields, found 2"}


def test_bytes_that_are_not_utf8_matter_only_in_rows_that_are_read(tmp_path, monkeypatch):
    """In a broken line they are never read (no error); in a needed cell of a good row they are the
    line-by-line reader's one line naming line and column."""
    path = tmp_path / "d.csv"
    path.write_bytes("\n".join([HEADER, GOOD[0], "a,1.5", "b\xff,1,2", *GOOD[1:], ""]).encode("latin-1"))
    around, by_lines = both_readers(path, Columns(), monkeypatch)
    assert around[1:] == by_lines[1:] and around[2] == ([3, 4], ["expected 4 fields, found 2",
                                                                 "expected 4 fields, found 3"])
    path.write_bytes("\n".join([HEADER, GOOD[0], "a,1.5", "b\xff,1,2,n", *GOOD[1:], ""]).encode("latin-1"))
    with pytest.raises(DataError, match=r"line 4, column 'product': expected UTF-8 text"):
        read_rows(path, Columns())


@pytest.mark.parametrize("block", [1, 7, 64])
def test_lines_found_block_by_block_are_the_same(tmp_path, monkeypatch, block):
    """Blocks far smaller than a line (and a CRLF cut between two blocks) change nothing."""
    from fitcore.data import textfile
    lines = [*GOOD[:6], "a,1.5", *GOOD[6:12], "b,2,3,n,x,y,z", "", *GOOD[12:], "a"]
    path = data_file(tmp_path / "d.csv", lines, eol="\r\n")
    expected = both_readers(path, Columns(), monkeypatch)[1]
    monkeypatch.setattr(textfile, "BLOCK", block)
    monkeypatch.setattr(read_csv, "BLOCK", block)
    monkeypatch.setattr(read_csv, "_read_slow", lambda *a: pytest.fail("read line by line"))
    found = outcome(path, Columns())
    same_rows(found[0], expected[0])
    assert found[1:] == expected[1:]


def test_pyarrow_is_handed_the_bytes_in_a_buffer_arrow_allocated(tmp_path, monkeypatch):
    """No Python object inside what pyarrow's threads hold (see ``test_pyarrows_reader_is_handed_no_python_object``):
    the file's bytes without the broken line sit in Arrow's own memory while it reads them."""
    from pyarrow import csv as arrow_csv
    path = data_file(tmp_path / "d.csv", [*GOOD[:5], "a,1.5", *GOOD[5:]])
    seen = []
    real = arrow_csv.read_csv

    def watch(source, parse_options=None, **kw):
        seen.append((type(source), parse_options.invalid_row_handler, pa.total_allocated_bytes(),
                     source.size() if isinstance(source, pa.BufferReader) else None))
        return real(source, parse_options=parse_options, **kw)
    monkeypatch.setattr(arrow_csv, "read_csv", watch)
    read_rows(path, Columns())
    assert len(seen) == 2  # the file refused, then its bytes without the short line
    (kind_1, handler_1, _, _), (kind_2, handler_2, allocated, size) = seen
    assert issubclass(kind_1, pa.NativeFile) and kind_2 is pa.BufferReader and handler_1 is handler_2 is None
    assert size == len(path.read_bytes()) - len("a,1.5\n") and allocated >= size


@given(st.lists(st.sampled_from(["a", ",", "\r", "\n", "\r\n", "b,c"]), max_size=40))
@hsettings(max_examples=300, deadline=None)
def test_physical_lines_are_those_of_a_text_reader_without_newline_translation(pieces):
    from fitcore.data.textfile import line_bounds
    text = "".join(pieces)
    data = np.frombuffer(text.encode(), np.uint8)
    starts, ends = line_bounds(data)
    # reference: io.TextIOWrapper(newline="") — the lines Python's csv module is given — minus their line ends
    lines = io.TextIOWrapper(io.BytesIO(text.encode()), encoding="ascii", newline="").readlines()
    assert [text[s:e] for s, e in zip(starts.tolist(), ends.tolist())] == [line.rstrip("\r\n") for line in lines]
    assert starts.tolist() == np.cumsum([0, *map(len, lines)])[:-1].tolist()


@pytest.mark.slow
def test_a_large_file_with_a_few_broken_lines_in_different_blocks(tmp_path, monkeypatch):
    rng = np.random.default_rng(7)
    n = 300_000
    lines = [f"item {k},{p:.2f},{v:.1f},x" for k, p, v in zip(rng.integers(0, 3000, n), rng.uniform(1, 9, n),
                                                               rng.uniform(0, 500, n))]
    for at in (0, 1, 150_000, 299_998):
        lines[at] = lines[at].rsplit(",", 2)[0]
    lines[200_000] += ",y"
    lines[250_000] = lines[250_000].replace(",", ",abc", 1)  # a number that is not one, as well
    path = data_file(tmp_path / "d.csv", lines)
    around, by_lines = both_readers(path, Columns(), monkeypatch)
    same_rows(around[0], by_lines[0])
    assert around[1:] == by_lines[1:]
    assert sorted(around[0].broken) == [0, 1, 150_000, 200_000, 299_998]
