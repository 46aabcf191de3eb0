"""What the report says stands on each series after a second cycle: holds sign no curve, every note keeps its own
author and time, a carried decision names who made it, a stale series shows its signed numbers.

Two cycles of the invented straight-line demand of ``tests/cli/test_cycle.py`` (``MOVER``'s demand drops by 40%
in the new weeks).  First cycle, by ana: an override with a note, a hold with a note, a note alone, and an accept
of ``MOVER``.  Second cycle: ``fit --ledger``, ``ledger carry`` by bo, a note by ana on ``MOVER`` (stale: its
curve failed the backtest, so it was not carried), then ``ledger accept-unflagged`` by dan.  The signed numbers
are checked against statsmodels OLS ``get_prediction`` on the first cycle's rows, and against ``ledger export``.
"""
from __future__ import annotations

import csv
import html
import re

import numpy as np
import pytest

from fitcore import ledger
from pricefold.cli import main
from tests.cli.test_cycle import MOVER, histories, write_weeks

PLAN = 2.3
COMMON = ["--date", "week", "--plan-price", str(PLAN), "--degrees", "1-2", "--no-loglog", "--quiet"]
OVERRIDDEN, HELD, NOTED = "item 0", "item 1", "item 2"
NOTES = {OVERRIDDEN: "the buyer expects a bend", HELD: "ask the buyer", NOTED: "check the promo calendar",
         MOVER: "demand fell: new shelf"}


def line_at_plan(data, product: str) -> dict:
    """statsmodels OLS of volume on 1, price over the series' rows: the prediction at the plan price and its 95%
    prediction interval (the outside reference for a signed straight line)."""
    import pandas as pd
    import statsmodels.api as sm
    rows = pd.read_csv(data)
    rows = rows[rows["product"] == product]
    price, volume = rows["price"].to_numpy(float), rows["volume"].to_numpy(float)
    fit = sm.OLS(volume, np.column_stack([np.ones_like(price), price])).fit()
    frame = fit.get_prediction(np.array([[1.0, PLAN]])).summary_frame(alpha=0.05)
    return {"volume": float(frame["mean"].iloc[0]), "lo": float(frame["obs_ci_lower"].iloc[0]),
            "hi": float(frame["obs_ci_upper"].iloc[0])}


@pytest.fixture(scope="module")
def cycle(tmp_path_factory):
    from fitcore.ledger.snapshot import from_records
    from fitcore.results.read import read_results
    folder = tmp_path_factory.mktemp("standing")
    book = folder / "ledger.jsonl"
    write_weeks(folder / "c1.csv", 40, seed=11)
    assert main(["fit", str(folder / "c1.csv"), *COMMON, "-o", str(folder / "r1.json")]) == 0
    first = {r["key"]["product"]: r for r in read_results(folder / "r1.json")[1]}
    assert first[MOVER]["chosen"] == "poly1" and first[OVERRIDDEN]["chosen"] == "poly1"
    ana = ledger.Identity("ana", "ana", "host")

    def entry(product, action, model=None, note=""):
        record = first[product]
        signed = from_records([(record, model)], 0.95)[0] if model else None
        return ledger.Entry(series=record["key"], action=action, fingerprint=record["fingerprint"],
                            results="ab" * 32, model=model, proposed=record["chosen"], note=note, signed=signed)

    for one in (entry(OVERRIDDEN, "override", "poly2", NOTES[OVERRIDDEN]), entry(HELD, "hold", None, NOTES[HELD]),
                entry(NOTED, "note", None, NOTES[NOTED]), entry(MOVER, "accept", "poly1")):
        ledger.append(book, [one], ana)  # one by one, as the triage screen records them
    write_weeks(folder / "c2.csv", 44, drop_from=40, seed=11)
    assert main(["fit", str(folder / "c2.csv"), *COMMON, "-o", str(folder / "r2.json"), "--ledger", str(book)]) == 0
    assert main(["ledger", "carry", str(folder / "r2.json"), "--ledger", str(book), "--analyst", "bo", "-q"]) == 0
    second = {r["key"]["product"]: r for r in read_results(folder / "r2.json")[1]}
    ledger.append(book, [ledger.Entry(series=second[MOVER]["key"], action="note", fingerprint=second[MOVER][
        "fingerprint"], results="cd" * 32, model=None, proposed=second[MOVER]["chosen"], note=NOTES[MOVER],
        supersedes=histories(book)[MOVER].latest["digest"])], ana)
    assert main(["ledger", "accept-unflagged", str(folder / "r2.json"), "--ledger", str(book), "--analyst", "dan",
                 "-q"]) == 0
    books = histories(book)
    assert books[OVERRIDDEN].current["action"] == "carry" and books[MOVER].current["action"] == "accept"
    assert books[NOTED].current["analyst"] == "dan" and books[HELD].current["action"] == "hold"
    page = folder / "report.html"
    assert main(["report", str(folder / "r2.json"), "--ledger", str(book), "-o", str(page)]) == 0
    text = page.read_text(encoding="utf-8")
    rows = {html.unescape(re.sub(r"<[^>]+>", "", m.group(1))): m.group(0)
            for m in re.finditer(r"<tr data-status=\"\w+\"><td[^>]*>(.*?)</td>.*?</tr>", text, re.S)}
    articles = {html.unescape(m.group(1)): m.group(0)
                for m in re.finditer(r"<article class=\"exception\"[^>]*><h3>([^<]*)</h3>.*?</article>", text, re.S)}
    return {"folder": folder, "book": book, "rows": rows, "articles": articles, "histories": books,
            "second": second}


def stamp(record: dict) -> str:
    """'ana, 2026-12-03 18:57': who recorded it and when (UTC, to the minute), as the ledger holds it."""
    return f"{record['analyst']}, {record['at'][:10]} {record['at'][11:16]}"


def cells(row: str) -> dict:
    return {label: html.unescape(re.sub(r"<[^>]+>", "", body))
            for label, body in re.findall(r"<td[^>]*data-label=\"([^\"]+)\"[^>]*>(.*?)</td>", row, re.S)}


def test_a_held_series_shows_no_signed_curve_and_its_proposal_as_the_proposal(cycle):
    row, article = cells(cycle["rows"][HELD]), cycle["articles"][HELD]
    proposal = cycle["second"][HELD]["chosen"]
    hold = cycle["histories"][HELD].current
    assert row["Model"].startswith("none") and "held" in row["Model"] and f"proposal {proposal}" in row["Model"]
    assert row["Analyst"] == "ana" and row["Note"] == NOTES[HELD] and hold["at"][11:16] in row["Time"]
    assert "signed on earlier data" not in article and "stands" not in article
    assert f"{proposal} (proposal)" in article and "held by ana" in html.unescape(article)


def test_each_note_keeps_its_author_and_time(cycle):
    books = cycle["histories"]
    carried = cells(cycle["rows"][OVERRIDDEN])
    override = books[OVERRIDDEN].decision
    assert carried["Analyst"].startswith("bo") and stamp(override) in carried["Analyst"]
    assert carried["Note"] == f"{stamp(override)}: {NOTES[OVERRIDDEN]}"
    bulk = cells(cycle["rows"][NOTED])
    note = next(r for r in books[NOTED].records if r["action"] == "note")
    assert bulk["Analyst"] == "dan" and bulk["Note"] == f"{stamp(note)}: {NOTES[NOTED]}"
    stale = cells(cycle["rows"][MOVER])
    note = books[MOVER].records[-1]
    assert stale["Analyst"] == "ana" and stale["Note"] == f"{stamp(note)}: {NOTES[MOVER]}"


def test_a_stale_series_shows_its_signed_numbers_as_the_export_does(cycle, tmp_path):
    folder = cycle["folder"]
    reference = line_at_plan(folder / "c1.csv", MOVER)  # statsmodels OLS get_prediction on the signed rows
    out = tmp_path / "decisions.csv"
    assert main(["ledger", "export", str(cycle["book"]), "--results", str(folder / "r2.json"), "-o", str(out)]) == 0
    exported = next(r for r in csv.DictReader(open(out, newline="")) if r["product"] == MOVER)
    assert exported["status"] == "stale"
    for name in ("volume", "lo", "hi"):
        assert float(exported[f"plan_{name}"]) == pytest.approx(reference[name], rel=1e-9)
    row = cells(cycle["rows"][MOVER])
    signed = f"{reference['volume']:,.1f} ({reference['lo']:,.1f}–{reference['hi']:,.1f})"  # all above zero
    assert row["Volume (95% PI)"] == f"{signed} as signed"
    refit = cycle["second"][MOVER]["plan"]
    assert f"{refit['volume']:,.1f}" not in row["Volume (95% PI)"]
    article = html.unescape(cycle["articles"][MOVER])
    assert f"{reference['volume']:,.1f}" in article.split("<figure")[0]  # the facts line: as signed
    assert f"{refit['volume']:,.1f}" in article  # the proposal's, named as the proposal
    assert "poly1 (signed on earlier data)" in article and "poly1 (proposal)" in article
