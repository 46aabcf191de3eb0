"""A series already carried to these data (by ``--carry-revised`` or a plain carry) is "carried already" to
every later ``ledger carry``, never "left for a human" (trials found a plain carry after ``--carry-revised``
counting the revised series as left, while ``show --ledger`` said it stood accepted (carried))."""
from __future__ import annotations

import pytest

from pricefold.cli import main
from tests.cli.test_cycle import MOVER, histories, signed_then_next_rows, write_redated


@pytest.mark.parametrize("suffix", [".json", ".parquet"])
def test_a_series_carried_over_a_revised_history_counts_as_carried_already(tmp_path, capsys, suffix):
    book = tmp_path / "ledger.jsonl"
    signed, header, rows = signed_then_next_rows(tmp_path, book)
    write_redated(tmp_path / "redated.csv", header, rows)
    results = tmp_path / f"r2{suffix}"
    assert main(["fit", str(tmp_path / "redated.csv"), "--date", "week", "--plan-price", "2.3", "--degrees", "0-1",
                 "--no-loglog", "-o", str(results), "--quiet", "--ledger", str(book)]) == 0
    capsys.readouterr()
    assert main(["ledger", "carry", str(results), "--ledger", str(book), "--carry-revised"]) == 0
    err = capsys.readouterr().err
    assert f"carried {signed} signed series" in err and "1 of them over a revised history" in err, err
    assert histories(book)[MOVER].current["action"] == "carry"
    for extra in ([], ["--carry-revised"]):  # again, with the option or without: nothing left for anyone
        assert main(["ledger", "carry", str(results), "--ledger", str(book), *extra]) == 0
        err = capsys.readouterr().err
        assert f"carried no series: nothing written to {book} ({signed} carried already)" in err, (extra, err)
        assert "left for a human: 0 (none)" in err, (extra, err)
    assert main(["show", str(results), "--ledger", str(book), "--product", MOVER]) == 0
    assert "ledger: accepted (carried)" in capsys.readouterr().out
