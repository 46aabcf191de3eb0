"""Triage with controls: ``c`` toggles the observations between raw and adjusted volumes, the candidate
table says each control's effect in words; without controls the key does nothing and is not offered."""
from __future__ import annotations

import numpy as np

from fitcore.review.evidence import adjusted_volumes, series_rows
from tests.tui.conftest import make_app, screen_text, started, until
from tui.factory import sample_source
from tui.widgets.charts import curve_chart


def rendered(renderable) -> str:
    import io

    from rich.console import Console
    console = Console(width=160, record=True, file=io.StringIO())
    console.print(renderable)
    return console.export_text()


def put_on(app, label: str) -> int:
    session = app.session
    session.set_filter("all", None)
    session.cursor = next(i for i, s in enumerate(session.view) if session.label(int(s)) == label)
    app.screen.refresh_all()
    return int(session.view[session.cursor])


async def test_c_shows_volumes_adjusted_to_the_plan_controls(ledger_path):
    app = make_app(ledger_path, sample_source(("promo",)))
    async with app.run_test(size=(160, 60)) as pilot:
        await started(app, pilot)
        s = put_on(app, "truffle oil 250 ml · North")
        await pilot.pause()
        results, evidence = app.session.results, app.screen.evidence
        await until(pilot, lambda: "• observed, raw (c: adjust them to the plan's controls)" in screen_text(app))
        text = rendered(evidence.candidate_table(s))  # below the charts: may be scrolled out of view
        c = int(results.chosen[s])
        assert "promo: ×0.5 volume" in text  # loglog: promotion weeks sold half (they were the quiet ones)
        assert any("promo: −" in line and "units" in line for line in text.splitlines())  # polynomials: units
        raw = evidence.adjusted
        await pilot.press("c")
        await until(pilot, lambda: "adjusted to the plan's controls (c: show them raw)" in screen_text(app))
        assert evidence.adjusted is not raw
        # What the chart draws: each promotion week's volume doubled (exp(−γ) with γ ≈ ln 0.5), the rest as sold.
        _, volume, _ = series_rows(results, s)
        moved = adjusted_volumes(results, s, c)
        promo = results.data.controls["promo"][results.data.offsets[s]:results.data.offsets[s + 1]] > 0
        np.testing.assert_allclose(moved[~promo], volume[~promo])
        np.testing.assert_allclose(moved[promo] / volume[promo], np.exp(-results.controls.coef[s, c, 0]))
        assert curve_chart(results, s, 80, 14, c, {}, True).plain != curve_chart(results, s, 80, 14, c, {}).plain
        await pilot.press("c")
        await until(pilot, lambda: "• observed, raw (c: adjust them to the plan's controls)" in screen_text(app))


async def test_without_controls_c_is_not_a_key(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(160, 50)) as pilot:
        await started(app, pilot)
        assert not app.screen.check_action("adjust", ())
        await pilot.press("c")
        await pilot.pause()
        assert app.screen.evidence.adjusted is False and "adjusted" not in screen_text(app)
