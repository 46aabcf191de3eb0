"""The sign-off report says what ``show --ledger`` and the screen say of a series whose decision a revoke left standing:
due a person, in the same words (``due.recorded_due``); and, where the results' own backtest read the ledger before
the revoke, not that (show says "changed since the fit" there; results read with their data fitted again are
judged by a fresh backtest, as the screen judges them)."""
from __future__ import annotations

import html
import re

import pytest

from pricefold.cli import main
from tests.cli.test_revoked_carry import REVOKED, carry_revoked


def show_due(results, book, capsys) -> str:
    capsys.readouterr()
    assert main(["show", str(results), "--ledger", str(book), "--product", REVOKED]) == 0
    return re.search(r"ledger: stale — due: (.*)\n", capsys.readouterr().out).group(1)


def report_of(results, book, page) -> tuple[str, str]:
    """(the decisions table's row of ``REVOKED``, its section in full), as HTML."""
    assert main(["report", str(results), "--ledger", str(book), "-o", str(page)]) == 0
    text = page.read_text()
    row = next(m.group(0) for m in re.finditer(r"<tr data-status=[^>]*>.*?</tr>", text, re.S)
               if f">{REVOKED}</a>" in m.group(0) or f">{REVOKED}<" in m.group(0))
    article = next(m.group(0) for m in re.finditer(r"<article class=\"exception\"[^>]*><h3>([^<]*)</h3>.*?</article>",
                                                  text, re.S) if html.unescape(m.group(1)) == REVOKED)
    return row, article


@pytest.mark.parametrize("suffix", [".json", ".parquet"])
def test_the_report_says_revoked_as_show_says_it(tmp_path, capsys, suffix):
    book, results = carry_revoked(tmp_path, suffix)
    said = show_due(results, book, capsys)
    assert said.startswith("revoked by bo")
    row, article = report_of(results, book, tmp_path / "report.html")
    assert f"due: {html.escape(said)}" in row
    assert f"Due: {html.escape(said)}." in article
    if suffix == ".parquet":  # judged by its own backtest, as show judges it (a JSON file's data are fitted again)
        before = tmp_path / "r2.parquet"  # fitted before the carry and its revoke
        assert show_due(before, book, capsys) == "changed since the fit: fit again with --ledger"
        row, article = report_of(before, book, tmp_path / "before.html")
        assert "revoked by" not in row and "Due: revoked" not in article
