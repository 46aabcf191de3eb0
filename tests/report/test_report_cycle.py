"""The sign-off report after ``fit --ledger``: ``shifted`` in the flag table, the backtest in the exceptions.

The cycle is the invented one of ``tests/cli/test_cycle.py`` (straight-line demand, one series whose
demand drops by 40% in the new weeks).  The expected flags and sentences are read from the results file
``fit --ledger`` wrote — the same sentences ``show`` and the triage screen print — not from the report.
"""
from __future__ import annotations

import html
import json
import re

from pricefold.cli import main
from tests.cli.test_cycle import MOVER, fit, write_weeks


def test_the_report_shows_shifted_and_each_stale_series_backtest(tmp_path):
    book = tmp_path / "ledger.jsonl"
    write_weeks(tmp_path / "c1.csv", 40, seed=9)
    fit(tmp_path / "c1.csv", tmp_path / "r1.json")
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(book), "-q"]) == 0
    write_weeks(tmp_path / "c2.csv", 44, drop_from=40, seed=9)
    series = fit(tmp_path / "c2.csv", tmp_path / "r2.json", book)
    shifted = {name: next(f["message"] for f in r["flags"] if f["code"] == "shifted")
               for name, r in series.items() if any(f["code"] == "shifted" for f in r["flags"])}
    assert MOVER in shifted
    page = tmp_path / "report.html"
    assert main(["report", str(tmp_path / "r2.json"), "--ledger", str(book), "-o", str(page)]) == 0
    text = page.read_text()
    row = re.search(r"<tr><td><code>shifted</code></td><td[^>]*>warn</td><td class=\"num\">(\d+)</td>", text)
    assert row and int(row.group(1)) == len(shifted)
    articles = {html.unescape(m.group(1)): m.group(0)
                for m in re.finditer(r"<article class=\"exception\"[^>]*><h3>([^<]*)</h3>.*?</article>", text, re.S)}
    assert html.escape(shifted[MOVER]) in articles[MOVER]
    passed = [name for name in series if name not in shifted and name in articles]
    assert passed  # stale (a stop flag) with a backtest that held: the numbers are still shown
    for name in passed:
        assert "Since sign-off:" in articles[name] and "its error is" in articles[name]
    assert json.loads((tmp_path / "r2.json").read_text())["ledger"]["path"] == str(book)


def test_a_report_of_last_cycles_results_says_the_decisions_are_on_newer_data(tmp_path):
    """A trial made the report of cycle 1's results after cycle 2's sign-off: "149 stale (1 overridden on older
    data)", each series "as signed on earlier data" — the newest decisions called old.  ``show --ledger`` says
    "decided on newer data"; the report now does too, first thing on the page."""
    book = tmp_path / "ledger.jsonl"
    write_weeks(tmp_path / "c1.csv", 40, seed=9)
    first = fit(tmp_path / "c1.csv", tmp_path / "r1.json")
    write_weeks(tmp_path / "c2.csv", 44, seed=9)
    fit(tmp_path / "c2.csv", tmp_path / "r2.json")
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r2.json"), "--ledger", str(book), "-q"]) == 0
    accepted = sum(1 for line in book.read_text().splitlines() if json.loads(line)["action"] == "accept")
    assert 0 < accepted <= len(first)
    for results, newer in (("r1.json", accepted), ("r2.json", 0)):
        page = tmp_path / f"{results}.html"
        assert main(["report", str(tmp_path / results), "--ledger", str(book), "-o", str(page)]) == 0
        text = html.unescape(page.read_text())
        said = f"{accepted} series were decided on newer data than these results"
        assert (said in text) == bool(newer), results
        if newer:
            assert f"{accepted} decided on newer data)" in text and "on older data" not in text
            assert "as signed on earlier data" not in text and "signed on newer data" in text


def test_a_stale_series_planned_at_another_price_says_both_prices(tmp_path):
    """A trial: the decisions table read 'apples 1 kg · North stale poly1 2.20 1,041 (876.8–1,205) as signed' where
    this plan prices it at 3.30, and the section 'at the plan price 2.20' beside a chart of 3.30.  The price the
    signed numbers are at is said as the signed one, with this plan's beside it."""
    book = tmp_path / "ledger.jsonl"
    write_weeks(tmp_path / "c1.csv", 40, seed=9)
    fit(tmp_path / "c1.csv", tmp_path / "r1.json")  # plan price 2.30
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(book), "-q"]) == 0
    write_weeks(tmp_path / "c2.csv", 44, seed=9)
    assert main(["fit", str(tmp_path / "c2.csv"), "--date", "week", "--plan-price", "2.1", "--degrees", "0-1",
                 "--no-loglog", "-o", str(tmp_path / "r2.json"), "--quiet", "--ledger", str(book)]) == 0
    page = tmp_path / "report.html"
    assert main(["report", str(tmp_path / "r2.json"), "--ledger", str(book), "-o", str(page)]) == 0
    text = page.read_text()
    rows = re.findall(r"<tr data-status=\"stale\">.*?</tr>", text, re.S)
    assert rows and all("2.30 <span class=\"muted\">signed; this plan 2.10</span>" in row for row in rows)
    articles = re.findall(r"<article class=\"exception\".*?</article>", text, re.S)
    stale = [a for a in articles if "st-stale" in a]
    assert stale and all("at the signed plan price 2.30:" in a and "this plan prices it at 2.10" in a for a in stale)
