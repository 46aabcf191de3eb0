"""The report counts, lists and orders an overridden series by the flags its row shows (its own curve's, as
``ledger export`` writes them), not by its proposal's: the summary's flag table and "N series carry no flag",
which series the decisions table lists (decisions made in bulk: only those showing a stop flag) and in which
order, and the order of the sections in full.

The series, their fits and the ledger are ``tests/cli/test_export_override_flags.py``'s (``run``): every
decision there is one batch (bulk), four of them overrides whose curves rise or go below zero where their
proposals do not, or the reverse — checked there apart from pricefold with numpy's ``Polynomial``.  The order
expected is the attention rule written out here (more stop flags, then more warn flags, then the lower of
the score each row shows — an override's own curve's Q² —, then the results' order), apart from
``fitcore.review.attention``.
"""
from __future__ import annotations

import math
import re

import pytest

from fitcore.review.flags import SEVERITY
from pricefold.cli import main
from tests.cli.test_export_override_flags import _codes, _rows, run  # noqa: F401 (a fixture)


def shown_flags(run) -> dict[str, list[str]]:
    """product → the flags its export row gives (a series the ledger does not name: its results' flags)."""
    exported = _rows(run.exported["json"])
    return {r["key"]["product"]: exported[r["key"]["product"]]["flags"].split() if r["key"]["product"] in exported
            else _codes(r) for r in run.document["series"]}


def attention(run, flags: dict[str, list[str]], models: dict[str, str] | None = None) -> list[str]:
    """Every product in attention order by ``flags``: stop flags, warn flags, then the score its row shows (none
    lowest) — the proposal's, or where ``models`` names the model an override made stand (product → model; every
    case of ``run`` when None), that candidate's Q²."""
    models = {r["key"]["product"]: model for r, model in run.cases.values()} if models is None else models

    def rank(item):
        i, record = item
        product = record["key"]["product"]
        codes = flags[product]
        stop = sum(SEVERITY[code] == "stop" for code in codes)
        score = (record["score"] if product not in models else
                 next(c["q2"] for c in record["candidates"] if c["name"] == models[product]))
        score = score if score is not None and math.isfinite(score) else -math.inf
        return -stop, -(len(codes) - stop), score, i
    return [r["key"]["product"] for _, r in sorted(enumerate(run.document["series"]), key=rank)]


@pytest.fixture(scope="module")
def page(run, tmp_path_factory) -> str:
    out = tmp_path_factory.mktemp("report") / "report.html"
    assert main(["report", str(run.parquet), "--ledger", str(run.book), "-o", str(out)]) == 0
    return out.read_text()


def test_the_cases_show_other_stop_flags_than_their_proposals(run):
    """What the tests below lean on: the override of a rising proposal shows no rising, an override that rises or
    goes below zero shows it (numpy checks these curves in ``test_export_override_flags``)."""
    flags = shown_flags(run)
    cases = {name: record["key"]["product"] for name, (record, _) in run.cases.items()}
    assert "rising" not in flags[cases["proposal rises"]]
    assert "rising" in flags[cases["rises, proposal near-tie"]]
    assert "below-zero" in flags[cases["below zero"]]
    proposals = {r["key"]["product"]: _codes(r) for r in run.document["series"]}
    assert attention(run, flags) != attention(run, proposals, {})


def test_the_summary_counts_each_flag_and_the_clean_series_as_the_rows_show_them(run, page):
    flags = shown_flags(run)
    summary = page.split("<section id=\"summary\">", 1)[1].split("</section>", 1)[0]
    counted = {code: int(n.replace(",", "")) for code, n in
               re.findall(r"<tr><td><code>([a-z-]+)</code></td><td[^>]*>[a-z]+</td><td class=\"num\">([\d,]+)</td>",
                          summary)}
    expected = {}
    for codes in flags.values():
        for code in codes:
            expected[code] = expected.get(code, 0) + 1
    assert counted == expected
    clean = int(re.search(r"<p>([\d,]+) series carry no flag\.</p>", summary).group(1))
    assert clean == sum(not codes for codes in flags.values())


def test_the_decisions_table_lists_the_bulk_decided_by_the_stop_flags_shown_in_attention_order(run, page):
    flags = shown_flags(run)
    table = page.split("<section id=\"decisions\">", 1)[1].split("</section>", 1)[0]
    listed = re.findall(r"<tr data-status=\"[a-z]+\"><td[^>]*>(?:<a[^>]*>)?([^<]+)<", table)
    stopped = [p for p in attention(run, flags) if any(SEVERITY[code] == "stop" for code in flags[p])]
    assert listed == stopped


def test_the_overrides_sections_in_full_come_in_attention_order_by_their_own_flags(run, page):
    flags = shown_flags(run)
    sections = re.findall(r"<article class=\"exception\" id=\"s\d+\"><h3>([^<]+)</h3>", page)
    overridden = {record["key"]["product"] for record, _ in run.cases.values()}
    assert sections[:len(overridden)] == [p for p in attention(run, flags) if p in overridden]
