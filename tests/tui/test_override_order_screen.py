"""The triage list's attention order goes by the flags its rows show: an override's own curve's (as ``ledger
export`` writes them and the report orders by), not its proposal's — an override of a rising proposal to a flat
curve no longer heads the list by the proposal's stop flag, nor ranks by the proposal's score beside the override's
own that its row shows; one whose own curve rises moves up.

The series, their fits and the ledger are ``tests/cli/test_export_override_flags.py``'s (``run``), where which
curves rise or go below zero is checked apart from pricefold with numpy's ``Polynomial``; the order expected is
the attention rule as ``tests/report/test_report_shown_flags.py`` writes it out.
"""
from __future__ import annotations

import re

from fitcore import ledger
from fitcore.review.flags import SEVERITY
from fitcore.results.source import source_from_results
from pricefold.cli import main
from tests.cli.test_export_override_flags import _codes, _rows, run  # noqa: F401 (a fixture)
from tests.fitcore.ledger_support import ANA
from tests.report.test_report_shown_flags import attention, shown_flags
from tests.tui.conftest import make_app, screen_text, started, until
from tests.tui.test_override_flags_listed import on_a_copy
from tests.tui.test_two_analysts import BO


def products(session) -> list[str]:
    return [session.results.data.key_of(s)["product"] for s in session.view.tolist()]


async def test_the_lists_attention_order_goes_by_an_overrides_own_flags(run, tmp_path):
    app = on_a_copy(run, tmp_path)
    async with app.run_test(size=(80, 24)) as pilot:
        session = await started(app, pilot)
        session.set_filter("all", None)
        app.screen.refresh_all()
        await pilot.pause(0.3)
        expected = attention(run, shown_flags(run))
        assert session.sort == "attention" and products(session) == expected
        on_screen = re.findall(r"\bitem \d\d\b", screen_text(app))
        assert on_screen and on_screen == expected[:len(on_screen)]  # the rows as drawn, top down


async def test_anothers_override_reorders_the_screen_and_the_report_agrees(run, tmp_path):
    """bo's screen lists every series pending; ana overrides the rising proposal with a flat curve (from her own
    screen: appended to the one ledger); bo's list moves it down by the flags its row now shows, and a report made
    after gives its row the same flags."""
    book = tmp_path / "ledger.jsonl"
    record, model = run.cases["proposal rises"]
    product = record["key"]["product"]
    bo = make_app(book, source_from_results(run.parquet), who=BO)
    async with bo.run_test(size=(80, 24)) as pilot:
        session = await started(bo, pilot)
        session.set_filter("all", None)
        proposals = {r["key"]["product"]: _codes(r) for r in run.document["series"]}
        assert products(session) == attention(run, proposals, {})
        ledger.append(book, [ledger.Entry(series=record["key"], action="override", fingerprint=record["fingerprint"],
                                          results=ledger.results_digest(run.document), model=model,
                                          proposed=record["chosen"], note="flat here", flags=_codes(record))], ANA)
        s = int(session.keys.indices_of([record["key"]])[0])
        await until(pilot, lambda: session.status[s] == "overridden")  # bo's screen looks every 2 s
        await pilot.pause()
        own = _rows(run.exported["json"])[product]["flags"].split()  # the same override in the export's run
        assert "rising" in proposals[product] and "rising" not in own
        assert sorted(session.listed_flags(s)) == sorted(own)
        assert products(session) == attention(run, {**proposals, product: own}, {product: model})
        assert products(session).index(product) > attention(run, proposals, {}).index(product)
    out = tmp_path / "report.html"
    assert main(["report", str(run.parquet), "--ledger", str(book), "-o", str(out)]) == 0
    row = re.search(rf"<tr data-status=\"overridden\"><td[^>]*>(?:<a[^>]*>)?{product}<.*?</tr>", out.read_text())
    cell = re.search(r"data-label=\"Flags\">(.*?)</td>", row.group(0)).group(1)
    assert sorted(re.findall(r"<span class=\"flag [^\"]*\"[^>]*>([a-z-]+)</span>", cell)) == sorted(own)


async def test_after_an_override_moves_the_row_the_cursor_goes_to_the_row_below_it_before(run, tmp_path):
    """Working down "all series" by attention, an override re-sorts the list (its row's own flags and score): the
    cursor goes on to the series that was below it, not to the row below where the override landed (a tmux trial:
    it jumped to the clean rows far down)."""
    record, model = run.cases["proposal rises"]
    app = make_app(tmp_path / "ledger.jsonl", source_from_results(run.parquet))
    async with app.run_test(size=(80, 24)) as pilot:
        session = await started(app, pilot)
        session.set_filter("all", None)
        s = int(session.keys.indices_of([record["key"]])[0])
        at = int((session.view == s).nonzero()[0][0])
        below = int(session.view[at + 1])
        session.cursor = at
        app.screen.refresh_all()
        await pilot.pause()
        await pilot.press("o")
        await pilot.pause()
        options = app.screen.query_one("#dialog-options")
        options.highlighted = [row.name for row in app.screen.rows].index(model)
        await pilot.pause()
        await pilot.press("enter")
        await pilot.pause()
        await pilot.press(*"flat here", "enter")
        await until(pilot, lambda: session.status[s] == "overridden")
        await pilot.pause()
        assert int((session.view == s).nonzero()[0][0]) != at  # it moved: its own flags are not its proposal's
        assert session.current == below


async def test_the_evidence_of_an_override_says_its_own_flags_before_the_proposals_sentences(run, tmp_path):
    """The list's row of an override to a flat curve showed no flag while the evidence beside it read '! [stop]
    rising: the chosen curve has volume rising…' — the proposal's, unlabelled (a trial).  It now opens with the
    override's own codes, as its row shows them, and says the sentences are the proposal's."""
    app = on_a_copy(run, tmp_path)
    exported = _rows(run.exported["json"])
    async with app.run_test(size=(160, 50)) as pilot:
        session = await started(app, pilot)
        for name in ("proposal rises", "below zero"):
            record, model = run.cases[name]
            session.bring(int(session.keys.indices_of([record["key"]])[0]))
            app.screen.refresh_all()
            own = exported[record["key"]["product"]]["flags"].split()
            said = " · ".join(sorted(own, key=lambda code: SEVERITY[code] != "stop")) or "no flag"
            lead = f"{model}, which stands: {said}. The flags below are the proposal's, {record['chosen']}'s:"
            await until(pilot, lambda: lead in " ".join(screen_text(app).split()))
            assert "rising" in _codes(record) if name == "proposal rises" else "below-zero" in own, name
