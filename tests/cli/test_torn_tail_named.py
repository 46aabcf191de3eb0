"""An append that moves an interrupted tail aside names the side file (a trial: "the next append moves it to a side
file" was said before, and nothing said where it went)."""
from __future__ import annotations

from pathlib import Path

from fitcore import ledger
from pricefold.cli import main

SAMPLE = Path(__file__).resolve().parents[2] / "sample"


def test_the_append_that_moves_a_torn_tail_aside_says_where(tmp_path, capsys):
    book = tmp_path / "L.jsonl"
    assert main(["ledger", "accept-unflagged", str(SAMPLE / "results.parquet"), "--ledger", str(book), "-q"]) == 0
    whole = book.read_bytes()
    torn = b'{"action":"accept","ana'  # a killed writer's half line
    book.write_bytes(whole + torn)
    capsys.readouterr()
    assert main(["ledger", "revoke", str(book), "--record", "1", "--note", "a second look"]) == 0
    err = capsys.readouterr().err
    [side] = list(tmp_path.glob("L.jsonl.torn-*"))
    assert side.read_bytes() == torn
    assert f"pricefold ledger: {book}: note: the interrupted tail after its last whole record was moved to {side.name} " \
           "beside it" in err
    assert ledger.verify(book) == [] and book.read_bytes().startswith(whole)
