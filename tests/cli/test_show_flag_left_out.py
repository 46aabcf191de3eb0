"""``show --ledger OTHER --flag shifted`` on results backtested against another ledger: their ``shifted`` flags
are left out, so the filter lists by what is shown (trials found it listing the series the stored flag picked
under a line saying that flag was left out)."""
from __future__ import annotations

import pytest

from pricefold.cli import main
from tests.cli.test_cycle import MOVER, first_cycle_signed, write_weeks


@pytest.mark.parametrize("suffix", [".json", ".parquet"])
def test_a_flag_left_out_lists_no_series_and_says_why(tmp_path, capsys, suffix):
    book = tmp_path / "ledger.jsonl"
    first_cycle_signed(tmp_path, book)
    write_weeks(tmp_path / "c2.csv", 48, drop_from=40)  # the mover's demand drops: its signed curve shifts
    results = tmp_path / f"r2{suffix}"
    assert main(["fit", str(tmp_path / "c2.csv"), "--date", "week", "--plan-price", "2.3", "--degrees", "0-1",
                 "--no-loglog", "-o", str(results), "--quiet", "--ledger", str(book)]) == 0
    capsys.readouterr()
    assert main(["show", str(results), "--ledger", str(book), "--flag", "shifted"]) == 0
    assert MOVER in capsys.readouterr().out  # against its own ledger the flag picks the mover
    copy = tmp_path / "copy.jsonl"
    copy.write_bytes(book.read_bytes())
    assert main(["show", str(results), "--ledger", str(copy), "--flag", "shifted"]) == 1
    said = capsys.readouterr()
    assert said.out == ""
    assert f"backtested against {book}, not {copy}" in said.err
    assert (f"no series listed: the 'shifted' flags of {results} speak of another ledger's signed curves, and are "
            f"left out (fit again with --ledger {copy})") in said.err
    assert main(["show", str(results), "--ledger", str(copy), "--flag", "shifted", "--product", MOVER]) == 1
    assert capsys.readouterr().out == ""
