"""The list's model column for a series whose data changed since its decision (stale): the model signed, as
``show --ledger`` and ``ledger export`` give it (↺ for an override) — the screen and the command line say the
same model for every series."""
from __future__ import annotations

from fitcore import ledger
from pricefold.cli import main
from pricefold.cycle_cli import standing_model
from pricefold.ledger_cli import open_ledger
from tests.cli.test_carried_override import COMMON, carried_override
from tests.cli.test_cycle import write_weeks
from tests.tui.conftest import ANA
from tui.factory import open_stored_session


async def test_the_list_and_show_give_the_same_model_for_every_series_stale_ones_too(tmp_path):
    from fitcore.results.read import read_results
    from tests.tui.conftest import all_listed, screen_text
    from tui.app import TriageApp
    book, key, _, _ = carried_override(tmp_path)  # ana's override (poly2 over poly1) carried to cycle 2
    write_weeks(tmp_path / "c3.csv", 48, seed=11)  # cycle 3: not carried yet, so every decision is stale
    out = tmp_path / "r3.parquet"
    assert main(["fit", str(tmp_path / "c3.csv"), *COMMON, "-o", str(out), "--ledger", str(book)]) == 0
    app = TriageApp(lambda progress: open_stored_session(out, book, ANA))
    async with app.run_test(size=(160, 50)) as pilot:
        session = await all_listed(app, pilot)
        rows = [line for line in screen_text(app).splitlines() if "item " in line and " 48 " in line]
    # the row as drawn: the model signed, as show --ledger's list gives it (the proposal poly1 before)
    assert any(f"{key['product']} " in row and " poly2↺ " in row for row in rows), rows
    reader = open_ledger(book)
    records = {ledger.replay.series_id(r["key"]): r for r in read_results(out)[1]}
    seen = set()
    for s in range(session.results.n_series):
        record = records[ledger.replay.series_id(session.keys.key_of(s))]
        shown = standing_model(record, reader)  # ↺ there on every override; here the status mark ↺ says it
        assert session.listed_model(s)[0] == (shown if session.status[s] == "stale" else shown.rstrip("↺"))
        seen.add(session.status[s])
        if record["key"] == key:
            assert session.status[s] == "stale" and session.listed_model(s)[0] == "poly2↺"
            assert record["chosen"] == "poly1"  # the proposal, which the list showed before
    assert "stale" in seen
