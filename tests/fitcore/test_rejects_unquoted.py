"""The rejects file of a CSV without quotes is cut straight out of the file's bytes (``rejects._unquoted_rows``);
it must be byte for byte what Python's csv module, reading every line, writes (``write_rejects``' other path)."""
from __future__ import annotations

import csv
import gzip
import io

import pytest

from fitcore.data import rejects as rejects_module
from fitcore.data.loader import load_with_rejects
from fitcore.data.rejects import write_rejects

ROWS = ["a,1.5,10", "a,x,11", "a,2.0,-3", "b,2.5", "", "b,3.0,7,9", "b,3.5,4,caf\xe9", "c,4.0,5", "c,-1,5"]


def variants():
    body = ["product,price,volume", *ROWS]
    yield "lf", "\n".join(body).encode() + b"\n", ",", ".csv"
    yield "crlf", "\r\n".join(body).encode() + b"\r\n", ",", ".csv"
    yield "cr", "\r".join(body).encode() + b"\r", ",", ".csv"
    yield "unended", "\n".join(body).encode(), ",", ".csv"
    yield "bom", b"\xef\xbb\xbf" + "\n".join(body).encode() + b"\n", ",", ".csv"
    yield "latin1", "\n".join(body).encode("latin-1") + b"\n", ",", ".csv"  # bytes that are not UTF-8
    yield "tsv", "\n".join(line.replace(",", "\t") for line in body).encode() + b"\n", "\t", ".tsv"
    yield "gzip", gzip.compress("\n".join(body).encode() + b"\n"), ",", ".csv.gz"


def written(rejects) -> bytes:
    out = io.BytesIO()
    write_rejects(rejects, out)
    return out.getvalue()


@pytest.mark.parametrize("name, content, delimiter, suffix", list(variants()), ids=[v[0] for v in variants()])
def test_cut_from_the_bytes_as_the_csv_module_reads_them(tmp_path, monkeypatch, name, content, delimiter, suffix):
    path = tmp_path / f"d{suffix}"
    path.write_bytes(content)
    _, rejects = load_with_rejects(path)
    assert len(rejects) >= 5
    used = []
    real = rejects_module._unquoted_rows
    monkeypatch.setattr(rejects_module, "_unquoted_rows", lambda *args: used.append(real(*args)) or used[-1])
    fast = written(rejects)
    monkeypatch.setattr(rejects_module, "_unquoted_rows", lambda *args: False)
    assert used == [True] and fast == written(rejects)
    # every row as wide as the header: a CSV reader finds line and reason under their names (an extra field
    # joined to the last one, a missing one empty)
    text = fast.decode("utf-8", "surrogateescape")
    rows = list(csv.DictReader(io.StringIO(text, newline=""), delimiter=","))
    assert [int(row["line"]) for row in rows] == rejects.lines.tolist()
    assert [row["reason"] for row in rows] == rejects.reasons and all(None not in row for row in rows)
    wide = next(row for row in rows if row["reason"] == "expected 3 fields, found 4")
    assert wide["volume"] == delimiter.join(["7", "9"])


def test_a_file_with_a_quote_is_read_by_the_csv_module(tmp_path, monkeypatch):
    path = tmp_path / "d.csv"
    path.write_text('product,price,volume\n"a, quoted",1.5,10\na,x,11\nb,2.0\n')
    _, rejects = load_with_rejects(path)
    out = io.BytesIO()
    assert not rejects_module._unquoted_rows(rejects, dict(zip(rejects.lines.tolist(), rejects.reasons)), None)
    write_rejects(rejects, out)
    assert out.getvalue().decode().splitlines() == ["product,price,volume,line,reason",
                                                    "a,x,11,3,non-numeric price",
                                                    "b,2.0,,4,\"expected 3 fields, found 2\""]
