"""The near-tie flag, the chart and the override dialog speak of the same candidates: the chart draws the
candidate the flag's sentence names, and the override dialog opens on the proposal (or the model standing),
not on a candidate that carries cautions of its own."""
from __future__ import annotations

import pytest
from textual.widgets import OptionList

from fitcore.review.evidence import runner_up
from fitcore.review.flags import CODES
from tests.tui.conftest import all_listed, make_app, on_series, screen_text, until
from tui.screens.override import OverrideDialog

APRICOTS = {"product": "dried apricots 500 g", "region": "East"}


def named_rival(session, s: int) -> str:
    """The candidate series ``s``'s near-tie sentence names (its first word)."""
    [sentence] = [f["message"] for f in session.diagnosis.flags_of(s) if f["code"] == "near-tie"]
    return sentence.split(" ", 1)[0]


async def test_the_chart_draws_the_candidate_the_near_tie_flag_names(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(160, 50)) as pilot:
        session = await all_listed(app, pilot)
        results = session.results
        tied = [int(s) for s in session.diagnosis.raised[:, CODES.index("near-tie")].nonzero()[0]]
        # the case the trial found: the flag names another candidate than the lowest other CV error
        s = next(s for s in tied if named_rival(session, s) != results.names[runner_up(results, s)])
        s = await on_series(app, pilot, results.data.key_of(s))
        named, lowest = named_rival(session, s), results.names[runner_up(results, s)]
        evidence = app.screen.evidence
        await until(pilot, lambda: evidence.series == s and not evidence.has_class("catching-up")
                    and "(chosen)" in screen_text(app))  # this series' charts drawn, not the last one's
        text = screen_text(app)
        assert f"-- {named} (near tie)" in text
        assert f"{lowest} (runner-up)" not in text


@pytest.mark.parametrize("size", [(80, 24), (160, 50)])
async def test_the_override_dialog_opens_on_the_proposal(ledger_path, size):
    app = make_app(ledger_path)
    async with app.run_test(size=size) as pilot:
        s = await on_series(app, pilot, APRICOTS)
        results = app.session.results
        await pilot.press("o")
        await pilot.pause()
        dialog = app.screen
        assert isinstance(dialog, OverrideDialog)
        options = dialog.query_one(OptionList)
        assert options.get_option_at_index(options.highlighted).id == results.names[results.chosen[s]]
        await pilot.press("enter")  # the proposal cannot be picked: nothing happens until a move
        await pilot.pause()
        assert app.screen is dialog


async def test_the_override_dialog_opens_on_the_model_that_stands(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(160, 50)) as pilot:
        s = await on_series(app, pilot, APRICOTS)
        session, results = app.session, app.session.results
        other = next(name for c, name in enumerate(results.names)
                     if results.available[s, c] and c != results.chosen[s] and c != runner_up(results, s))
        session.decide(session.look(s), "override", model=other, note="checked by hand")
        session.set_filter("all", None)
        session.bring(s)
        app.screen.refresh_all()
        await pilot.pause()
        await pilot.press("o")
        await pilot.pause()
        options = app.screen.query_one(OptionList)
        assert options.get_option_at_index(options.highlighted).id == other


def test_stored_flags_name_the_same_rival_as_a_fresh_diagnosis(tmp_path):
    """The demo opens the shipped results file, whose flags are stored as sentences: the rival read from
    there is the one a fresh diagnosis of the same fit computes, for every near-tie series."""
    import shutil

    from tests.tui.conftest import ANA
    from tui.factory import SAMPLE, open_session, open_stored_session, sample_source
    from tui.widgets.evidence import near_tie_rival

    shutil.copy(SAMPLE / "results.parquet", tmp_path / "results.parquet")
    stored = open_stored_session(tmp_path / "results.parquet", tmp_path / "a.jsonl", ANA)
    fresh = open_session(sample_source(), tmp_path / "b.jsonl", ANA)
    assert "rival" not in stored.diagnosis.numbers
    tied = [int(s) for s in (fresh.diagnosis.raised[:, CODES.index("near-tie")]).nonzero()[0]]
    assert len(tied) >= 3
    for s in tied:
        assert stored.results.data.key_of(s) == fresh.results.data.key_of(s)
        assert near_tie_rival(stored, s) == near_tie_rival(fresh, s) == int(fresh.diagnosis.numbers["rival"][s]) >= 0
