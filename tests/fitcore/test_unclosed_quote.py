"""A missing closing quote is one clear error, never a run of lines swallowed into one cell.

Under RFC 4180 (section 2, rules 5-7) a field that opens with a quote runs to its closing quote,
line breaks included; Python's csv module (strict=False) and pyarrow both read an unclosed quote as a
field running to the end of the file.  The files here are small and invented; which line opens the
quote and where it would close are written into each case by hand.
"""
from __future__ import annotations

import gzip
from datetime import date, timedelta

import pytest

from fitcore.data.loader import Columns, load_with_rejects
from fitcore.errors import DataError
from pricefold.cli import main

HEADER = "product,region,week,price,volume,promo"
COLUMNS = Columns(segments=("region",), date="week")


def good_rows(product: str, region: str, count: int) -> list[str]:
    first = date(2025, 1, 6)
    return [f"{product},{region},{first + timedelta(weeks=i)},{2 + 0.1 * (i % 7):.2f},{10 - i % 5},0"
            for i in range(count)]


def file_text(line7: str, later: list[str] | None = None) -> str:
    """Header, five good rows (lines 2-6), ``line7``, then 85 good rows (lines 8-92)."""
    rows = [HEADER, *good_rows("a", "N", 5), line7, *(later or good_rows("b", "S", 85))]
    return "\n".join(rows) + "\n"


NEVER_CLOSED = {
    "first field": '"a,N,2025-01-01,2,3,0',
    "middle field": 'a,N,2025-01-01,2,"3,0',
    "last field": 'a,N,2025-01-01,2,3,"0',  # the row keeps its 6 fields: the last one swallows 85 lines
}


@pytest.mark.parametrize("compressed", [False, True])
@pytest.mark.parametrize("where", sorted(NEVER_CLOSED))
def test_a_quote_never_closed_names_its_line(tmp_path, where, compressed):
    text = file_text(NEVER_CLOSED[where]).encode()
    path = tmp_path / "unterminated.csv"
    path.write_bytes(gzip.compress(text) if compressed else text)
    with pytest.raises(DataError) as caught:
        load_with_rejects(path, COLUMNS)
    message = str(caught.value)
    assert caught.value.line == 7 and "never closed" in message and "lines 7-92" in message
    assert "\n" not in message


def test_a_quote_closed_five_lines_late_names_both_lines(tmp_path):
    later = good_rows("b", "S", 85)
    later[4] += '"'  # line 12 closes the quote opened on line 7: lines 7-12 are one row of 1 field
    path = tmp_path / "late.csv"
    path.write_text(file_text('"a,N,2025-01-01,2,3,0', later))
    with pytest.raises(DataError, match=r"line 7: a quoted field opens on this line and runs to line 12, "
                                        r"making one row of 1 field \(expected 6\)"):
        load_with_rejects(path, COLUMNS)


def test_a_quoted_line_break_that_closes_is_still_a_row(tmp_path):
    """The check does not touch a well-formed quoted line break (RFC 4180 rule 6)."""
    path = tmp_path / "fine.csv"
    path.write_text(file_text('"a\nb",N,2025-03-01,2,3,0'))  # the row takes lines 7-8
    data, rejects = load_with_rejects(path, COLUMNS)
    assert len(rejects) == 0 and 7 in data.line.tolist() and len(data.line) == 91


def test_the_command_exits_2_with_one_line_and_writes_nothing(tmp_path, capsys):
    path = tmp_path / "unterminated.csv"
    path.write_text(file_text(NEVER_CLOSED["first field"]))
    out = tmp_path / "u2.json"
    code = main(["fit", str(path), "--segment", "region", "--date", "week", "-o", str(out)])
    err = capsys.readouterr().err.strip()
    assert code == 2 and len(err.splitlines()) == 1
    assert "unterminated.csv, line 7: a quote opens on this line and is never closed" in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["unterminated.csv"]


@pytest.mark.parametrize("compressed", [False, True])
@pytest.mark.parametrize("ending", ["\n", ""])
@pytest.mark.parametrize("where", ["first field", "middle field"])
def test_a_quote_never_closed_on_the_last_line_names_it(tmp_path, where, ending, compressed):
    """On the last line the quote swallows no line, but leaves too few fields.  Before: that row was rejected
    as "expected 6 fields, found 1", the quote unsaid."""
    text = "\n".join([HEADER, *good_rows("a", "N", 5), NEVER_CLOSED[where]]) + ending
    path = tmp_path / "last.csv"
    path.write_bytes(gzip.compress(text.encode()) if compressed else text.encode())
    with pytest.raises(DataError, match=r"line 7: a quote opens on this line, the last of the file, and is never "
                                        r"closed; expected 6 fields a row$"):
        load_with_rejects(path, COLUMNS)


def test_a_lone_quote_inside_a_field_on_the_last_line_is_text(tmp_path):
    """A quote inside a field is a character (RFC 4180 leaves it to readers; both readers keep it): a last line
    of the wrong number of fields holding one is a rejected row, not an unclosed quote."""
    path = tmp_path / "inch.csv"
    path.write_text("\n".join([HEADER, *good_rows("a", "N", 5), 'a 5" box,N,2025-03-01,2,3']) + "\n")
    _, rejects = load_with_rejects(path, COLUMNS)
    assert rejects.lines.tolist() == [7] and rejects.reasons == ["expected 6 fields, found 5"]


def test_the_last_line_is_found_as_the_csv_module_iterates_lines(tmp_path):
    """``last_line`` (read back from a plain file's end, or through a gzip file's blocks in the line count's pass)
    against the reference: the last line ``io.TextIOWrapper(newline="")`` yields, as Python's csv module reads
    lines (CRLF, CR or LF).  Random short texts cut into random blocks; and files past the first read-back."""
    import io
    import random

    from fitcore.data.textfile import _count_lines, last_line
    rng = random.Random(7)
    for _ in range(3000):
        data = bytes(rng.choice(b'ab"\r\n') for _ in range(rng.randint(0, 12)))
        cuts = sorted(rng.sample(range(len(data) + 1), k=min(len(data) + 1, rng.randint(0, 4))))
        blocks = [data[i:j] for i, j in zip([0, *cuts], [*cuts, len(data)]) if data[i:j]]
        lines = list(io.TextIOWrapper(io.BytesIO(data), encoding="latin-1", newline=""))
        assert _count_lines(iter(blocks), True) == (len(lines), lines[-1] if lines else "")
    for size in (10, 70_000, 300_000):  # the read-back begins with 64 KiB
        for end in ("", "\n", "\r\n", "\r"):
            data = ("x" * size + "\r\n" + "y" * size + end).encode()
            for path, raw in ((tmp_path / "f.csv", data), (tmp_path / "f.csv.gz", gzip.compress(data))):
                path.write_bytes(raw)
                assert last_line(path) == "y" * size + end
