"""Series whose ledger records moved on after ``fit --ledger`` read the ledger: ``show --ledger``, ``ledger carry``
and the screen judge them by one rule (``due.changed_since_fit``) and say it in the same words.

A trial found them apart: a series pending at the fit and accepted on the older data after it was "no backtest in
these results (fit with --ledger)" in show, though the results were fitted with --ledger, and in neither of
carry's counts; a series noted after the fit, or whose carry was revoked, was "backtest passed" in show while
carry counted it "changed since the fit"; a series held after the fit was counted twice by carry (held, and again
as changed).  Now every stale series of show's list is in exactly one of carry's counts, under the words show
gives it ("backtest passed" for those carry carries)."""
from __future__ import annotations

import json
from collections import Counter

import pytest

from fitcore import ledger
from pricefold.cli import main
from tests.cli.test_cycle import fit, histories, write_weeks

PENDING, NOTED, HELD, CARRIED = "item 0", "item 1", "item 2", "item 3"  # what happens to each after the fit
WHO = ledger.Identity("cy", "cy", "host")


def record_number(book, product: str) -> int:
    """The number ``ledger show`` gives the latest record of ``product``."""
    return histories(book)[product].latest["seq"]


def fitted_then_moved_on(folder, suffix: str):
    """``(ledger, second cycle's results)``: every series of the first cycle accepted; ``PENDING``'s accept revoked
    before the second cycle's ``fit --ledger``; after it, ``PENDING`` accepted again on the first cycle's data,
    a note on ``NOTED``, a hold of ``HELD`` on the first cycle's data."""
    book = folder / "ledger.jsonl"
    write_weeks(folder / "c1.csv", 40, seed=9)
    fit(folder / "c1.csv", folder / "r1.json")
    assert main(["ledger", "accept-unflagged", str(folder / "r1.json"), "--ledger", str(book), "-q"]) == 0
    assert main(["ledger", "revoke", str(book), "--record", str(record_number(book, PENDING)), "--note", "x",
                 "-q"]) == 0
    write_weeks(folder / "c2.csv", 44, seed=9)
    results = folder / f"r2{suffix}"
    assert main(["fit", str(folder / "c2.csv"), "--date", "week", "--plan-price", "2.3", "--degrees", "0-1",
                 "--no-loglog", "-o", str(results), "--quiet", "--ledger", str(book)]) == 0
    assert main(["ledger", "accept-unflagged", str(folder / "r1.json"), "--ledger", str(book), "-q"]) == 0
    assert histories(book)[PENDING].current["action"] == "accept"
    before = histories(book)
    first = {r["key"]["product"]: r for r in json.loads((folder / "r1.json").read_text())["series"]}
    ledger.append(book, [
        ledger.Entry(series={"product": NOTED}, action="note", fingerprint=first[NOTED]["fingerprint"],
                     results="ab" * 32, note="asked the buyer", supersedes=before[NOTED].latest["digest"]),
        ledger.Entry(series={"product": HELD}, action="hold", fingerprint=first[HELD]["fingerprint"],
                     results="ab" * 32, note="ask why", supersedes=before[HELD].latest["digest"])], WHO)
    return book, results


def show_dues(results, book, capsys) -> Counter:
    """What ``show --ledger``'s list says is due of each stale series, counted."""
    capsys.readouterr()
    assert main(["show", str(results), "--ledger", str(book)]) == 0
    header, *rows = capsys.readouterr().out.splitlines()
    status, due, ratio = header.index(" status ") + 1, header.index(" due ") + 1, header.index("ratio")
    return Counter(row[due:ratio].strip() for row in rows if row[status:due].strip() == "stale")


def carry_counts(results, book, capsys) -> Counter:
    """``ledger carry``'s counts, those it carried under show's "backtest passed"."""
    capsys.readouterr()
    assert main(["ledger", "carry", str(results), "--ledger", str(book)]) == 0
    err = capsys.readouterr().err.splitlines()
    carried = next(line for line in err if line.startswith("carried "))
    left = next(line for line in err if line.startswith("left for a human: "))
    counts = Counter({" ".join(part.split()[:-1]): int(part.split()[-1])
                      for part in left[left.index("(") + 1:-1].split(" · ") if part != "none"})
    if not carried.startswith("carried no series"):
        counts["backtest passed"] = int(carried.split()[1])
    return counts


def in_carry_words(dues: Counter) -> Counter:
    """Show's dues as carry counts them: a stop flag without its codes."""
    out = Counter()
    for due, count in dues.items():
        out[due.split(" (")[0] if due.startswith("stop flag") else due] += count
    return out


@pytest.mark.parametrize("suffix", [".json", ".parquet"])
def test_every_stale_series_of_show_is_in_one_of_carrys_counts_in_the_same_words(tmp_path, capsys, suffix):
    book, results = fitted_then_moved_on(tmp_path, suffix)
    dues = show_dues(results, book, capsys)
    assert sum(dues.values()) == len(histories(book)) == 8
    assert carry_counts(results, book, capsys) == in_carry_words(dues), dues
    assert dues["changed since the fit"] == 2 and dues["new look (held)"] == 1, dues  # PENDING, NOTED; HELD
    for product, due in ((PENDING, "changed since the fit: fit again with --ledger"), (NOTED, "changed since the fit: "
                         "fit again with --ledger"), (HELD, "a new look (a hold has no curve to backtest)")):
        assert main(["show", str(results), "--ledger", str(book), "--product", product]) == 0
        assert f"ledger: stale — due: {due}\n" in capsys.readouterr().out, product


def test_a_revoked_carry_is_changed_since_the_fit_in_show_as_in_carry(tmp_path, capsys):
    """The accept the carry carried stands again, as the fit tested it ("backtest passed" in show before), but the
    ledger moved on since: carry will not supersede the revoke, and show says so."""
    book, results = fitted_then_moved_on(tmp_path, ".json")
    assert main(["ledger", "carry", str(results), "--ledger", str(book), "-q"]) == 0
    assert histories(book)[CARRIED].current["action"] == "carry"
    assert main(["ledger", "revoke", str(book), "--record", str(record_number(book, CARRIED)), "--note", "again",
                 "-q"]) == 0
    dues = show_dues(results, book, capsys)
    assert carry_counts(results, book, capsys) == dues
    assert dues == Counter({"changed since the fit": 3, "new look (held)": 1}), dues
