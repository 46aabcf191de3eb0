"""An accept made on another fit of the same data (``tests.cli.test_accept_of_another_fit``), on the triage
screen: the list row, the evidence's words and plan line, the candidate table and the chart give the accepted
model, as for an override, and say that these results propose another one.  The plan numbers are checked
against statsmodels OLS ``get_prediction`` of the straight line on the series' rows."""
from __future__ import annotations

import re

import pytest

from fitcore.results.source import source_from_results
from tests.cli.test_accept_of_another_fit import accepted_on_another_fit, line_at_plan
from tests.tui.conftest import assert_prediction_on_screen, make_app, on_series, screen_text
from tui.widgets.evidence import EvidencePanel


@pytest.fixture(scope="module")
def other_fit(tmp_path_factory):
    return accepted_on_another_fit(tmp_path_factory.mktemp("other-fit-screen"))


async def test_the_screen_shows_the_accepted_model_and_names_the_proposal(other_fit):
    book, results, key, proposal = other_fit
    app = make_app(book, source_from_results(results))
    async with app.run_test(size=(160, 50)) as pilot:
        s = await on_series(app, pilot, key)
        session = app.session
        names = session.results.names
        assert session.status[s] == "accepted" and names[int(session.results.chosen[s])] == proposal
        assert names[session.model_of(s)] == "poly1"
        await pilot.pause(0.5)
        text = screen_text(app)
        row = next(line for line in text.splitlines() if key["region"] in line and "obs" not in line and "✓" in line)
        assert re.search(rf" poly1 +\d+%  proposes {proposal} !rising", row), row
        words = " ".join(line.split("▕")[-1].strip() for line in text.splitlines())  # the evidence, unwrapped
        assert re.search(rf"Accepted poly1 \(ana .*accepted poly1 at [^)]*\), the proposal of another fit of these "
                         rf"data: these results propose {proposal}\. The numbers below are poly1's", words), words
        reference = line_at_plan(key["product"], key["region"])
        assert_prediction_on_screen(text, "poly1", reference)
        assert f"{proposal} predicts" not in text
        panel = app.screen.query_one(EvidencePanel)
        chart = panel.query_one("#ev-curve").render()
        legend = str(getattr(chart, "plain", chart))
        assert "poly1 (accepted)" in legend and f"{proposal} (proposed)" in legend


async def test_the_proposal_of_these_results_may_be_accepted_after_a_look(other_fit, tmp_path):
    """``a`` was hidden (the series "stands accepted") and the override dialog cannot pick the proposal: the
    analyst who looked again had no way to sign these results' proposal.  Now ``a`` accepts it (past its stop
    flag, with a note), and the row shows it with nothing more to say."""
    from fitcore import ledger
    book, results, key, proposal = other_fit
    copy = tmp_path / "ledger.jsonl"
    copy.write_bytes(book.read_bytes())
    app = make_app(copy, source_from_results(results))
    async with app.run_test(size=(160, 50)) as pilot:
        s = await on_series(app, pilot, key)
        assert "a accept" in screen_text(app).splitlines()[-1]
        await pilot.press("a")
        await pilot.pause(0.3)
        for key_pressed in "seed 1 bends":
            await pilot.press("space" if key_pressed == " " else key_pressed)
        await pilot.press("enter")
        await pilot.pause(0.3)
        written = ledger.Ledger(copy).records[-1]
        assert written["action"] == "accept" and written["model"] == proposal and written["series"] == key
        session = app.session
        assert session.status[s] == "accepted" and session.accepted_other(s) is None
        assert session.results.names[session.model_of(s)] == proposal


async def test_the_override_dialog_says_the_accept_that_stands(other_fit):
    """The dialog marked the accepted model '↺ … stands now', the list's mark of an override: it is an accept
    (of another fit's proposal), and says so."""
    from tui.screens.override import OverrideDialog
    book, results, key, proposal = other_fit
    app = make_app(book, source_from_results(results))
    async with app.run_test(size=(160, 50)) as pilot:
        await on_series(app, pilot, key)
        await pilot.press("o")
        await pilot.pause(0.3)
        assert isinstance(app.screen, OverrideDialog)
        lines = screen_text(app).splitlines()
        at = next(i for i, line in enumerate(lines) if re.search(r"[✓↺ ] poly1 ", line))
        assert re.search(r"✓ poly1 ", lines[at]) and "↺" not in "\n".join(lines), lines[at]
        assert "accepted, stands now" in lines[at + 1], lines[at + 1]


async def test_an_accept_of_another_fits_proposal_needs_attention(other_fit, tmp_path):
    """The "needs attention" list (the default) left out a series accepted as another fit's proposal: accepted,
    so not undecided, it showed under "all series" only, though its signed model is not what these results
    propose (flagged or not).  It needs attention until these results' proposal is accepted in its place."""
    from fitcore import ledger
    from tests.tui.conftest import started, until
    book, results, key, proposal = other_fit
    copy = tmp_path / "ledger.jsonl"
    copy.write_bytes(book.read_bytes())
    app = make_app(copy, source_from_results(results))
    async with app.run_test(size=(160, 50)) as pilot:
        session = await started(app, pilot)
        others = [s for s in range(session.results.n_series) if session.accepted_other(s) is not None]
        unflagged = [s for s in others if not session.diagnosis.raised[s].any()]
        # the sample's seed-1 fit moves a few accepted series, not all of them flagged
        assert len(others) >= 2 and unflagged, (others, unflagged)
        attention = session.needs_attention()
        accepted = {int(i) for i in (session.status == "accepted").nonzero()[0]}
        assert {int(i) for i in attention.nonzero()[0]} & accepted == set(others)  # these, and no other accept
        assert set(others) <= {int(s) for s in session.view}  # listed by the default filter
        assert f"{int(attention.sum())} listed (needs a decision;" in screen_text(app)
        s = next(i for i in others if session.results.data.key_of(i) == key)
        session.cursor = int((session.view == s).nonzero()[0][0])
        app.screen.refresh_all()
        await pilot.pause()
        await pilot.press("a")
        await pilot.pause(0.3)
        for key_pressed in "seed 1 bends":
            await pilot.press("space" if key_pressed == " " else key_pressed)
        await pilot.press("enter")
        await until(pilot, lambda: ledger.Ledger(copy).records[-1]["model"] == proposal)
        assert session.accepted_other(s) is None and not session.needs_attention()[s]
        assert int(session.needs_attention().sum()) == int(attention.sum()) - 1
