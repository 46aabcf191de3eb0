"""``--quiet`` keeps the rejected-rows warning; a column named twice anywhere in the header is an error.

Small invented files; the README states both rules (what ``--quiet`` hides; "a column named twice in
the header is an error naming both places").
"""
from __future__ import annotations

from pricefold.cli import main


def rows(header: str, cells: str, extra: list[str] = ()) -> str:
    return "\n".join([header, *(f"a,{1 + 0.1 * i:.1f},{100 - i}{cells}" for i in range(14)), *extra]) + "\n"


def test_quiet_still_warns_of_rejected_rows(tmp_path, capsys):
    data = tmp_path / "d.csv"
    data.write_text(rows("product,price,volume", "", ["a,-1,5"]))
    assert main(["fit", str(data), "-o", str(tmp_path / "r.json"), "--quiet"]) == 0
    err = capsys.readouterr().err
    assert err.splitlines() == [f"1 row rejected: 1 negative price — see {tmp_path / 'r.rejects.csv'}"]


def test_quiet_hides_the_summary_of_a_clean_run(tmp_path, capsys):
    data = tmp_path / "d.csv"
    data.write_text(rows("product,price,volume", ""))
    assert main(["fit", str(data), "-o", str(tmp_path / "r.json"), "--quiet"]) == 0
    assert capsys.readouterr().err == ""


def test_an_ignored_column_named_twice_is_one_line_and_exit_2(tmp_path, capsys):
    data = tmp_path / "d.csv"
    data.write_text(rows("product,price,volume,note,note", ",x,y"))
    assert main(["fit", str(data), "-o", str(tmp_path / "r.json")]) == 2
    err = capsys.readouterr().err.strip()
    assert err == (f"pricefold fit: {data}, line 1, column 'note': the column 'note' appears twice in the header "
                   f"(fields 4 and 5); rename one")
    assert not (tmp_path / "r.json").exists()


def test_blank_trailing_column_names_are_not_duplicates(tmp_path):
    data = tmp_path / "d.csv"
    data.write_text(rows("product,price,volume,,", ",,"))
    assert main(["fit", str(data), "-o", str(tmp_path / "r.json"), "--quiet"]) == 0
