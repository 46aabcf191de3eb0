"""The rejects file names each rejected row by the physical line it starts on, with that row's cells.

Generated files hold quoted line breaks (LF and CRLF, in key and in ignored cells), quoted delimiters
and quotes, and LF or CRLF line ends.  The expectation is made independently of both readers: the
generator writes each row itself and counts the line breaks before it, so it knows every row's
starting line and cells; which rows are unusable follows the README's rules.
"""
from __future__ import annotations

import csv
import gzip
import io

import pytest
from hypothesis import HealthCheck, given
from hypothesis import settings as hsettings
from hypothesis import strategies as st

from fitcore.data.loader import Columns, load_with_rejects
from fitcore.data.rejects import write_rejects
from fitcore.errors import DataError
from tests.fitcore.test_loader import independently_bad

KEYS = st.sampled_from(["a", "b", "app\nles", "x\r\ny", "p, q", 'say "hi"', "", "é"])
NUMBERS = st.one_of(st.integers(0, 999).map(str), st.sampled_from(["1.5", "-2", "x", "", "0", "3e2", "-0.5"]))
NOTES = st.sampled_from(["", "plain", "two\nlines", "three\r\nlines\r\nhere", "comma, inside", '"quoted"'])
ROW = st.tuples(KEYS, NUMBERS, NUMBERS, NOTES)


def quoted(cell: str) -> str:
    if any(ch in cell for ch in ',"\r\n'):
        return '"' + cell.replace('"', '""') + '"'
    return cell


def usable(row) -> bool:
    return not independently_bad(list(row[:3]))  # the README's rules, written out in the fuzz test


def written(rows, eol: str) -> tuple[str, list[int]]:
    """The file's text and the physical line each data row starts on (the header is line 1)."""
    text, starts = "product,price,volume,note" + eol, []
    for row in rows:
        starts.append(1 + text.count("\n"))  # every line end here holds one \n (LF or CRLF)
        text += ",".join(quoted(cell) for cell in row) + eol
    return text, starts


@given(st.lists(ROW, min_size=1, max_size=30), st.sampled_from(["\n", "\r\n"]), st.booleans())
@hsettings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
def test_rejects_name_the_physical_line_and_hold_that_rows_cells(tmp_path, rows, eol, compressed):
    text, starts = written(rows, eol)
    path = tmp_path / ("d.csv.gz" if compressed else "d.csv")
    path.write_bytes(gzip.compress(text.encode()) if compressed else text.encode())
    expected = [(line, list(row)) for line, row in zip(starts, rows) if not usable(row)]
    try:
        data, rejects = load_with_rejects(path, Columns())
    except DataError as exc:
        assert len(expected) == len(rows) and "no usable rows" in str(exc) and "\n" not in str(exc)
        return
    assert sorted(data.line.tolist()) == [line for line, row in zip(starts, rows) if usable(row)]
    out = io.BytesIO()
    write_rejects(rejects, out)
    found = list(csv.reader(io.StringIO(out.getvalue().decode("utf-8"), newline="")))
    assert found[0] == ["product", "price", "volume", "note", "line", "reason"]
    assert [(int(r[-2]), r[:-2]) for r in found[1:]] == expected


@pytest.mark.parametrize("eol", ["\n", "\r\n"])
def test_the_worked_example_of_a_shifted_line(tmp_path, eol):
    """A product "app\\nles" on row 2 and a negative price on physical line 8: line 8, that row's cells."""
    rows = [("a", "1.0", "30", ""), ("app\nles", "1.1", "29", ""), ("a", "1.2", "28", ""), ("a", "1.3", "27", ""),
            ("a", "1.4", "26", ""), ("a", "-1.5", "25", ""), ("a", "1.6", "24", "")]
    text, starts = written(rows, eol)
    assert starts[5] == 8
    path = tmp_path / "d.csv"
    path.write_bytes(text.encode())
    data, rejects = load_with_rejects(path, Columns())
    assert rejects.lines.tolist() == [8] and 8 not in data.line.tolist()
    out = io.BytesIO()
    write_rejects(rejects, out)
    assert out.getvalue().decode().splitlines()[1] == "a,-1.5,25,,8,negative price"
