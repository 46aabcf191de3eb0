"""A changed byte in a results file is an error at every reader, never a quietly different number.

Parquet's page checksums (a CRC-32 of each page, in the format's page header): pricefold writes them and
every reader of results checks them.  One bit of a number's page is flipped here — in the page's values,
so the file still parses and, without the checksum, reads back with that number changed (as it did) — and
each command that reads results must say so in one line naming the file, exit 2, and write nothing.
"""
from __future__ import annotations

from pathlib import Path

import pyarrow.parquet as pq
import pytest

from fitcore.errors import DataError
from fitcore.results.stored import stored_results
from pricefold.cli import main

SAMPLE = Path(__file__).resolve().parents[2] / "sample"
PLAN = ["--segment", "region", "--date", "week", "--plan", str(SAMPLE / "plan.csv")]


def flipped(good: Path, bad: Path, column: str, at: int | None = None) -> None:
    """``bad``: ``good`` with one bit flipped in ``column``'s first page (``at`` bytes into it: its page header),
    or else in its values: the first byte from the middle of the page whose flip still decompresses (a byte
    of snappy's literals, not of its tags, which would fail to decompress without any checksum)."""
    meta = pq.ParquetFile(good).metadata.row_group(0)
    chunk = next(meta.column(i) for i in range(meta.num_columns) if meta.column(i).path_in_schema == column)
    for offset in ([at] if at is not None else range(chunk.total_compressed_size // 2, chunk.total_compressed_size)):
        data = bytearray(good.read_bytes())
        data[chunk.data_page_offset + offset] ^= 0x40
        bad.write_bytes(bytes(data))
        if at is not None:
            return
        try:
            pq.read_table(bad, columns=[column.split(".")[0]])
            return
        except OSError:  # a tag: the page no longer decompresses
            continue
    raise AssertionError(f"no byte of {column}'s page flips to a page that still decompresses")


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    work = tmp_path_factory.mktemp("flipped")
    good = work / "good.parquet"
    assert main(["fit", str(SAMPLE / "wholesale.csv"), *PLAN, "-o", str(good), "-q"]) == 0
    out = {"good": good}
    for column in ("plan_volume", "score", "window_coef.list.element", "cov_unscaled.list.element"):
        out[column] = work / f"bad-{column.split('.')[0]}.parquet"
        flipped(good, out[column], column)
    return out


def test_without_the_checksum_the_flip_reads_as_a_changed_number(files):
    """The premise: the file still parses and one number differs (the check below is what catches it)."""
    good = pq.read_table(files["good"], columns=["plan_volume"]).column(0).to_pylist()
    bad = pq.read_table(files["plan_volume"], columns=["plan_volume"]).column(0).to_pylist()
    assert sum(a != b and not (a != a and b != b) for a, b in zip(good, bad)) == 1


@pytest.mark.parametrize("column, command", [  # each flipped in a column the command reads
    ("score", ["show", "{bad}"]),
    ("plan_volume", ["show", "{bad}", "--product", "lemons 500 g", "--key", "region=East"]),
    ("plan_volume", ["ledger", "export", "{ledger}", "--results", "{bad}", "-o", "{out}"]),
    ("window_coef", ["ledger", "accept-unflagged", "{bad}", "--ledger", "{ledger}", "-q"]),
    ("plan_volume", ["report", "{bad}", "--ledger", "{ledger}", "-o", "{out}"]),
    ("cov_unscaled", ["report", "{bad}", "--ledger", "{ledger}", "-o", "{out}"]),  # was a traceback
])
def test_every_command_refuses_a_flipped_number_in_one_line(files, tmp_path, capsys, column, command):
    ledger, out = tmp_path / "ledger.jsonl", tmp_path / "out.html"
    assert main(["ledger", "accept-unflagged", str(files["good"]), "--ledger", str(ledger), "-q"]) == 0
    before = ledger.read_bytes()
    capsys.readouterr()
    bad = files[next(name for name in files if name.split(".")[0] == column)]
    assert main([part.format(bad=bad, ledger=ledger, out=out) for part in command]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and str(bad) in err and "checksum" in err, err
    assert ledger.read_bytes() == before and not out.exists()


def test_the_triage_screens_reader_refuses_it_too_and_the_columns_read_behind_the_list(files):
    with pytest.raises(DataError, match="checksum"):
        stored_results(files["plan_volume"])
    results, _ = stored_results(files["window_coef.list.element"], later=True)  # the list's columns are whole
    results.later.start()
    with pytest.raises(DataError, match="checksum"):
        results.later.table()
    assert not results.complete  # so the screen never draws from the columns that failed (it raised there)


def test_a_changed_header_is_refused_by_its_checksum(files, tmp_path, capsys):
    """The header (settings, the interval level…) sits in the footer, outside the pages' checksums: a flip
    there turned a level of 0.95 into 0.85, which show printed and accept-unflagged signed.  Its SHA-256 is
    written beside it; here the header says 0.85 and the checksum is still the 0.95 one's."""
    table = pq.read_table(files["good"])
    meta = dict(table.schema.metadata)
    meta[b"pricefold"] = meta[b"pricefold"].replace(b'"level": 0.95', b'"level": 0.85')
    assert meta[b"pricefold"] != table.schema.metadata[b"pricefold"]
    bad, ledger = tmp_path / "level.parquet", tmp_path / "ledger.jsonl"
    pq.write_table(table.replace_schema_metadata(meta), bad)
    for argv in (["show", str(bad), "--product", "lemons 500 g", "--key", "region=East"],
                 ["ledger", "accept-unflagged", str(bad), "--ledger", str(ledger), "-q"]):
        capsys.readouterr()
        assert main(argv) == 2
        err = capsys.readouterr().err
        assert err.count("\n") == 1 and str(bad) in err and "does not match the checksum" in err, err
    assert not ledger.exists()


def test_a_flip_in_a_page_header_is_one_line_too(files, tmp_path, capsys):
    """pyarrow's message for a page header it cannot decode spans three lines: the first is said."""
    bad = tmp_path / "header.parquet"
    flipped(files["good"], bad, "score", at=6)
    for argv in (["show", str(bad)], ["show", str(bad), "--product", "lemons 500 g", "--key", "region=East"]):
        capsys.readouterr()
        assert main(argv) == 2
        err = capsys.readouterr().err
        assert err.count("\n") == 1 and str(bad) in err, err


def test_the_checksum_failure_is_said_in_plain_words():
    """pyarrow's "could not verify page integrity, CRC checksum verification failed for page_ordinal 0" is
    said as what it means to a user."""
    from fitcore.errors import first_line
    said = first_line(OSError("could not verify page integrity, CRC checksum verification failed for page_ordinal 0"))
    assert said == "a page's checksum does not match its contents: the file was damaged or changed after it was written"


def test_the_readme_quotes_the_line_a_damaged_page_prints(files, capsys):
    """The README quoted pyarrow's words ("could not verify page integrity, …"), which pricefold no longer prints."""
    import re
    from pathlib import Path
    assert main(["show", str(files["score"])]) == 2
    err = capsys.readouterr().err
    said = re.search(r"cannot read it \([^)]*\)", err)
    assert said, err
    readme = " ".join((Path(__file__).parents[2] / "README.md").read_text().split())
    assert f"`{said.group(0)}`" in readme, said.group(0)
