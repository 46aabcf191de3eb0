"""A revoke on the screen (``u``) that leaves a decision on other data standing: the screen says the series is due
a person (``revoked``, in full) as ``show --ledger`` and a screen opened afterwards say it, and ``ledger carry``
leaves it — the screen's own revoke, and one another analyst made (a results file's own backtest)."""
from __future__ import annotations

import re

from fitcore.data.columns import Columns
from fitcore.fit.settings import FitSettings
from fitcore.results.read import read_results
from pricefold.cli import main
from pricefold.cycle_cli import ledger_state
from pricefold.ledger_cli import open_ledger
from tests.cli.test_changed_since_fit import carry_counts
from tests.cli.test_cycle import fit, write_weeks
from tests.cli.test_revoked_carry import REVOKED, carry_revoked, fit_again
from tests.tui.conftest import ANA, all_listed, on_series, screen_text, until
from tui.app import TriageApp
from tui.factory import Source, open_session, open_stored_session

KEY = {"product": REVOKED}


def dialog_text(app) -> str:
    """The words inside the open dialog's box, its wrapped lines joined."""
    inside = [line.split("│")[1].strip() for line in screen_text(app).splitlines() if line.count("│") >= 2]
    return " ".join(part for part in inside if part)


def shown_due(results, book, product: str = REVOKED) -> str:
    """What ``show --ledger`` says ``product`` is due, from the results file's record."""
    record = next(r for r in read_results(results)[1] if r["key"]["product"] == product)
    return ledger_state(record, open_ledger(book), fitted=True)[1]


async def test_a_revoke_on_the_screen_leaves_the_older_decision_due_a_person(tmp_path, capsys):
    book = tmp_path / "ledger.jsonl"
    write_weeks(tmp_path / "c1.csv", 40, seed=9)
    fit(tmp_path / "c1.csv", tmp_path / "r1.json")
    assert main(["ledger", "accept-unflagged", str(tmp_path / "r1.json"), "--ledger", str(book), "-q"]) == 0
    write_weeks(tmp_path / "c2.csv", 44, seed=9)
    source = Source(data=tmp_path / "c2.csv", columns=Columns(date="week"),
                    settings=FitSettings(degrees=(0, 1), loglog=False), plan_price=2.3)
    app = TriageApp(lambda progress: open_session(source, book, ANA, None, progress))
    async with app.run_test(size=(160, 50)) as pilot:
        s = await on_series(app, pilot, KEY)
        session = app.session
        assert session.status[s] == "stale" and session.due(s) == "backtest passed"
        await pilot.press("a")  # accepted on these data by hand ...
        await until(pilot, lambda: session.status[s] == "accepted")
        await pilot.press("u")  # ... and taken back: last cycle's accept stands again
        await until(pilot, lambda: "Revoke your accept" in screen_text(app))
        assert ("made on other data than these: the series reads stale, and ledger carry will not carry it until "
                "someone decides the series.") in dialog_text(app)
        await pilot.press(*"want a fresh look", "enter")
        await until(pilot, lambda: session.status[s] == "stale")
        said = session.due(s)
        assert re.fullmatch(r'revoked by ana at \d{4}-\d\d-\d\d \d\d:\d\d UTC: "want a fresh look"', said), said
        await until(pilot, lambda: "status stale — due: revoked by ana at " in screen_text(app))
    assert open_session(source, book, ANA).due(s) == said  # a screen opened afterwards
    results = fit_again(tmp_path, "r2.json", book)  # the fit reads the revoke
    assert shown_due(results, book) == said
    assert carry_counts(results, book, capsys) == {"backtest passed": 7, "revoked": 1}


async def test_the_screen_on_a_results_file_says_revoked_as_show_says_it(tmp_path):
    book, results = carry_revoked(tmp_path, ".parquet")
    app = TriageApp(lambda progress: open_stored_session(results, book, ANA))
    async with app.run_test(size=(160, 50)) as pilot:
        session = await all_listed(app, pilot)
        s = int(session.keys.indices_of([KEY])[0])
        assert session.due(s) == shown_due(results, book) and session.due(s).startswith("revoked by bo")
        session.bring(s)
        app.screen.refresh_all()
        await until(pilot, lambda: "status stale — due: revoked by bo" in screen_text(app))
    before = tmp_path / "r2.parquet"  # fitted before the carry and its revoke: changed since the fit first
    stored = open_stored_session(before, book, ANA)
    t = int(stored.keys.indices_of([KEY])[0])
    assert stored.due(t) == shown_due(before, book) == "changed since the fit: fit again with --ledger"
