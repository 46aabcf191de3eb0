"""A product renamed in the next cycle's data (``carrots 1 kg`` → ``carrots 1kg``: no loose match, by design) leaves
its signed series out of the results: every command where results meet the ledger says, in one note on stderr
(never a refusal), how many of the ledger's signed series are not in these results, with an example; ``show``
with a filter counts only within it.

The ledger is the sample's (``accept-unflagged`` of ``sample/results.parquet``); the count each command says is
checked against the plain set arithmetic of the ledger's standing accepts among the renamed series.
"""
from __future__ import annotations

import csv
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from fitcore import ledger
from fitcore.ledger.missing import RENAMED
from pricefold.cli import main

SAMPLE = Path(__file__).resolve().parents[2] / "sample"
OLD, NEW = "carrots 1 kg", "carrots 1kg"


@pytest.fixture(scope="module")
def cycle(tmp_path_factory):
    """``(folder, ledger, results, signed)``: the sample signed, the next week with carrots renamed fitted against
    a copy of it, and which carrots series the ledger signed (regions, in the ledger's order)."""
    folder = tmp_path_factory.mktemp("renamed")
    book = folder / "ledger.jsonl"
    assert main(["ledger", "accept-unflagged", str(SAMPLE / "results.parquet"), "--ledger", str(book), "-q"]) == 0
    week = folder / "week.csv"
    subprocess.run([sys.executable, str(SAMPLE / "next_week.py"), str(week)], check=True, capture_output=True)
    with open(week, newline="") as src, open(folder / "next.csv", "w", newline="") as out:
        rows = csv.DictReader(src)
        write = csv.DictWriter(out, rows.fieldnames)
        write.writeheader()
        for row in rows:
            write.writerow({**row, "product": NEW} if row["product"] == OLD else row)
    signed = [h.current["series"]["region"] for h in ledger.Ledger(book).histories.values()
              if h.current["series"]["product"] == OLD and h.current["action"] == "accept"]
    assert signed  # some carrots were signed last cycle
    return folder, book, folder / "next.json", signed


def own_copy(book: Path, tmp_path: Path) -> Path:
    shutil.copyfile(book, tmp_path / "ledger.jsonl")
    return tmp_path / "ledger.jsonl"


def clause(count: int, book: Path, region: str) -> str:
    return (f"{count} signed series in {book} {'is' if count == 1 else 'are'} not in these results "
            f"({OLD} · {region}{', …' if count > 1 else ''})")


def test_every_command_notes_the_ledgers_signed_series_missing_from_the_results(cycle, capsys, tmp_path):
    """Before: ``fit --ledger`` said '… signed series on changed data' and nothing else; carry, show, export and
    accept-unflagged were silent, and the renamed series were accepted as new."""
    folder, signed_book, results, signed = cycle
    book = own_copy(signed_book, tmp_path)
    capsys.readouterr()
    assert main(["fit", str(folder / "next.csv"), "--segment", "region", "--date", "week", "--plan-price", "2.5",
                 "-o", str(results), "--ledger", str(book)]) == 0
    err = capsys.readouterr().err
    said = clause(len(signed), book, signed[0])
    assert f"pricefold fit: note: {said}; renamed in the data?" in err
    for command in (["show", str(results), "--ledger", str(book)],
                    ["ledger", "export", str(book), "--results", str(results), "-o", str(tmp_path / "e.csv"), "-q"],
                    ["ledger", "carry", str(results), "--ledger", str(book), "-q"],
                    ["ledger", "accept-unflagged", str(results), "--ledger", str(book), "-q"]):
        capsys.readouterr()
        assert main(command) == 0, command  # a note, not a refusal
        err = capsys.readouterr().err
        assert err.count("\n") == 1 and err.startswith(f"pricefold {command[0] if command[0] == 'show' else 'ledger'}: "
                                                       f"{results}: note: {said}; "), (command, err)


def test_show_counts_within_its_filter(cycle, capsys, tmp_path):
    """``--product`` or ``--key``: only the ledger's signed series the filter keeps; a filter matching no row (the
    old name) still says where those went; ``--flag`` counts none (a missing series has no flags here)."""
    folder, signed_book, results, signed = cycle
    if not results.exists():
        assert main(["fit", str(folder / "next.csv"), "--segment", "region", "--date", "week", "--plan-price", "2.5",
                     "-o", str(results), "-q"]) == 0
    book = own_copy(signed_book, tmp_path)
    capsys.readouterr()
    assert main(["show", str(results), "--ledger", str(book), "--product", "apples 1 kg"]) == 0
    assert "note:" not in capsys.readouterr().err
    assert main(["show", str(results), "--ledger", str(book), "--product", OLD]) == 1
    err = capsys.readouterr().err
    assert f"note: {clause(len(signed), book, signed[0])}" in err
    assert main(["show", str(results), "--ledger", str(book), "--product", OLD, "--key", f"region={signed[-1]}"]) == 1
    assert f"note: {clause(1, book, signed[-1])}" in capsys.readouterr().err
    assert main(["show", str(results), "--ledger", str(book), "--flag", "rising"]) == 0
    assert "note:" not in capsys.readouterr().err


def test_missing_from_counts_signed_series_only_and_not_where_none_is_shared():
    """Holds and notes sign no curve; another set of key columns is another data set; a ledger none of whose series
    is in the results is said by the 'none of …' clause instead."""
    from fitcore.ledger.missing import missing_from

    class History:
        def __init__(self, key, action):
            self.current = None if action == "note" else {"series": key, "action": action}
            self.latest = {"series": key}

    keys = [{"product": p, "region": r} for p in ("a", "b") for r in ("N", "S")]
    histories = {str(i): History(key, action) for i, (key, action) in enumerate(
        [({"product": "a", "region": "N"}, "accept"), ({"product": "c", "region": "N"}, "override"),
         ({"product": "c", "region": "S"}, "carry"), ({"product": "d", "region": "N"}, "hold"),
         ({"product": "e", "region": "N"}, "note"), ({"product": "f"}, "accept")])}
    found = missing_from(keys, histories)
    assert [k["product"] + k["region"] for k in found.keys] == ["cN", "cS"]
    assert found.said("L") == "2 signed series in L are not in these results (c · N, …)"
    assert missing_from(keys, histories, within=lambda key: key["region"] == "S").said("L") == \
        "1 signed series in L is not in these results (c · S)"
    assert missing_from([{"product": "z", "region": "N"}], histories).said("L") is None  # none shared


def test_the_report_says_both_in_its_summary(cycle, capsys, tmp_path):
    """Approvers read the page: its summary says how many signed series are not in the results and how many of the
    results' series look like the ledger's under another spelling (before: only the counts by status)."""
    pytest.importorskip("matplotlib")
    folder, signed_book, _, signed = cycle
    book = own_copy(signed_book, tmp_path)
    with open(folder / "next.csv", newline="") as src, open(tmp_path / "lower.csv", "w", newline="") as out:
        rows = csv.DictReader(src)
        write = csv.DictWriter(out, rows.fieldnames)
        write.writeheader()
        for row in rows:  # apples in the North spelled 'north' too
            write.writerow({**row, "region": "north"} if (row["product"], row["region"]) == ("apples 1 kg", "North")
                           else row)
    assert main(["fit", str(tmp_path / "lower.csv"), "--segment", "region", "--date", "week", "--plan-price", "2.5",
                 "-o", str(tmp_path / "r.parquet"), "-q"]) == 0
    capsys.readouterr()
    assert main(["report", str(tmp_path / "r.parquet"), "--ledger", str(book), "-o", str(tmp_path / "r.html")]) == 0
    page = tmp_path.joinpath("r.html").read_text()
    summary = page[page.index('<section id="summary">'):page.index("</section>", page.index('<section id="summary">'))]
    gone = len(signed) + 1  # the carrots signed, and apples in the North (signed: it carries no flag)
    # the example is a series the results do not hold in any spelling (before: apples 1 kg · North, said apart)
    assert (f"{gone} signed series in {book} are not in these results ({OLD} · {signed[0]}, …; 1 of them present only "
            f"under another spelling); {RENAMED}.") in summary  # the tail every other command says (before: none)
    assert (f"1 series in these results looks like a series in {book} under another spelling (region &quot;north&quot; "
            "for &quot;North&quot;)." in summary)
    # every one of them named, with the spelling these results hold (before: the example alone)
    items = summary[summary.index('<details class="missing">'):].split("<li>")[1:]
    assert len(items) == gone and f"{OLD} · {signed[0]}</li>" in items
    assert "apples 1 kg · North — in these results as apples 1 kg · north</li>" in items
    err = capsys.readouterr().err
    assert err.count(": note: ") == 2 and err.count(RENAMED) == 1
