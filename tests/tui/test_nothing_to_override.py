"""A series with one candidate fitted offers no override key, and ``o`` says why there is nothing to pick."""
from __future__ import annotations

import numpy as np
import pytest

from fitcore.data.loader import Columns
from tests.tui.conftest import csv_source, make_app, screen_text, started, until
from tui.factory import Source
from tui.screens.override import OverrideDialog


def one_price_source(tmp_path) -> Source:
    """'pickle' at a single price (only a constant can be fitted), 'jam' over a spread of prices."""
    rng = np.random.default_rng(2)
    jam = np.round(rng.uniform(1, 3, 40), 2)
    rows = [("pickle", 2.5, round(300 + rng.normal(0, 20))) for _ in range(40)]
    rows += [("jam", price, round(500 - 100 * price + rng.normal(0, 10))) for price in jam]
    return csv_source(tmp_path / "one.csv", ["product", "price", "volume"], rows, Columns())


@pytest.mark.parametrize("size", [(80, 24), (160, 50)])
async def test_o_is_not_offered_with_one_candidate_and_says_why(tmp_path, size):
    app = make_app(tmp_path / "ledger.jsonl", one_price_source(tmp_path))
    async with app.run_test(size=size, notifications=True) as pilot:
        session = await started(app, pilot)
        session.set_filter("all", None)
        results = session.results
        pickle = next(int(i) for i in session.view if session.label(int(i)) == "pickle")
        jam = next(int(i) for i in session.view if session.label(int(i)) == "jam")
        assert int(results.available[pickle].sum()) == 1 and int(results.available[jam].sum()) >= 2
        for s, offered in ((jam, True), (pickle, False)):
            session.cursor = int((session.view == s).nonzero()[0][0])
            app.screen.refresh_all()
            await pilot.pause()
            key_line = screen_text(app).splitlines()[-1]
            assert ("o override" in key_line) == offered, key_line
        await pilot.press("o")
        await until(pilot, lambda: "Nothing to override with" in screen_text(app))
        only = results.names[int(np.flatnonzero(results.available[pickle])[0])]
        assert f"only {only} could be fitted" in " ".join(screen_text(app).split())
        assert not isinstance(app.screen, OverrideDialog)
