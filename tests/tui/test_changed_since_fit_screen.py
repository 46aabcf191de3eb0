"""The screen on a results file's own backtest (``fit --ledger``, its rows not loaded) says what is due of a series
the ledger moved on for since that fit as ``show --ledger`` says it (``due.changed_since_fit``): it said
"a new look (no backtest here)" of a series pending at the fit and accepted since, and "backtest passed" of one
noted since, which carry leaves as changed since the fit."""
from __future__ import annotations

from fitcore import ledger
from fitcore.results.read import read_results
from pricefold.cycle_cli import ledger_state
from pricefold.ledger_cli import open_ledger
from tests.cli.test_changed_since_fit import HELD, NOTED, PENDING, fitted_then_moved_on
from tests.tui.conftest import ANA, all_listed, screen_text
from tui.app import TriageApp
from tui.factory import open_stored_session


async def test_the_screen_says_what_is_due_as_show_says_it(tmp_path):
    book, results = fitted_then_moved_on(tmp_path, ".parquet")
    app = TriageApp(lambda progress: open_stored_session(results, book, ANA))
    async with app.run_test(size=(160, 50)) as pilot:
        session = await all_listed(app, pilot)
        reader = open_ledger(book)
        records = {ledger.replay.series_id(r["key"]): r for r in read_results(results)[1]}
        said = {}
        for s in range(session.results.n_series):
            record = records[ledger.replay.series_id(session.keys.key_of(s))]
            assert session.due(s) == ledger_state(record, reader, fitted=True)[1], record["key"]
            said[record["key"]["product"]] = session.due(s)
        assert said[PENDING] == said[NOTED] == "changed since the fit: fit again with --ledger", said
        assert said[HELD] == "a new look (a hold has no curve to backtest)"
        session.bring(int(session.keys.indices_of([{"product": PENDING}])[0]))
        app.screen.refresh_all()
        await pilot.pause(0.3)
        assert "status stale — due: changed since the fit" in screen_text(app)
