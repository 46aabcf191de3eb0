"""An accept past a stop flag shows what is signed: the proposal, its plan volume and interval, and its
elasticity where one is defined (none at a volume at or below zero), within an 80×24 terminal."""
from __future__ import annotations

import pytest

from fitcore.review.formats import fmt
from tests.tui.conftest import all_listed, make_app, on_series, screen_text
from tui.screens.dialogs import TextDialog

LEMONS = {"product": "lemons 500 g", "region": "East"}


def dialog_words(app) -> str:
    """The words inside the dialog's border, its wrapped lines joined."""
    inside = [line[line.index("│") + 1:line.rindex("│")] for line in screen_text(app).splitlines()
              if line.count("│") >= 2]
    return " ".join(" ".join(inside).split())


@pytest.mark.parametrize("size", [(80, 24), (120, 40)])
async def test_accept_past_a_stop_flag_shows_the_plan_volume_being_signed(ledger_path, size):
    app = make_app(ledger_path)
    async with app.run_test(size=size) as pilot:
        s = await on_series(app, pilot, LEMONS)
        results, c = app.session.results, int(app.session.results.chosen[s])
        volume = float(results.plan_volume[s, c])
        assert volume < 0  # the case the trial found: a curve below zero at the plan price
        await pilot.press("a")
        await pilot.pause()
        assert isinstance(app.screen, TextDialog)
        text = dialog_words(app)
        assert "despite below-zero" in text
        # the figures the evidence panel states for the same model (the results file's own numbers)
        assert f"predicts volume {fmt(volume)}" in text
        assert f"PI {fmt(results.plan_lo[s, c])} to {fmt(results.plan_hi[s, c])}" in text
        assert "no elasticity" in text and "elasticity -" not in text and "elasticity +" not in text
        assert f"plan price {results.plan_price[s]:.2f}" in text
        assert "Enter to confirm" in text  # the whole dialog on screen


async def test_accept_past_a_stop_flag_with_a_positive_volume_shows_the_elasticity(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        session = await all_listed(app, pilot)
        results = session.results
        chosen = results.chosen
        stop = [int(i) for i in session.view if "stop" == session.severity(int(i))
                and chosen[int(i)] >= 0 and results.plan_volume[int(i), chosen[int(i)]] > 0
                and results.plan_price[int(i)] == results.plan_price[int(i)]
                and results.lineup.complexity[chosen[int(i)]] > 1]  # a flat curve's 0 is said as no measurement
        s = stop[0]
        session.cursor = int((session.view == s).nonzero()[0][0])
        app.screen.refresh_all()
        await pilot.pause()
        await pilot.press("a")
        await pilot.pause()
        text = dialog_words(app)
        assert f"elasticity {results.plan_elasticity[s, chosen[s]]:.2f}" in text
        assert f"predicts volume {fmt(results.plan_volume[s, chosen[s]])}" in text
