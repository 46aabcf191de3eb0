"""The open screen after a shifted series is decided again: its row no longer says ``?shifted``, as a screen opened
afterwards, ``show --ledger``, the report and the export say it (a trial: the screen that recorded the accept still
listed '✓ … ?shifted' beside it, while reopening it showed '—').  Whether the decision is this screen's own or
arrives from another process appending to the ledger; on JSON results (fitted again here, backtested live) and
Parquet results (their stored backtest).  A shifted series nobody decided keeps its flag.
"""
from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from fitcore.results.source import source_from_results
from tests.cli.test_redecided_shifted import ACCEPTED, LEFT, second_cycle_shifted
from tests.tui.conftest import ANA, make_app, on_series, screen_text, until
from tui.app import TriageApp
from tui.factory import open_stored_session

ROOT = Path(__file__).parents[2]


def app_on(folder: Path, book: Path, suffix: str) -> TriageApp:
    results = folder / f"r2{suffix}"
    if suffix == ".json":
        return make_app(book, source_from_results(results))
    return TriageApp(lambda progress: open_stored_session(results, book, ANA, None, progress))


def row(app, label: str) -> str:
    """The list's line of the series ``label`` as the terminal shows it."""
    return next(line for line in screen_text(app).splitlines() if f" {label} " in line)


@pytest.mark.parametrize("suffix", [".json", ".parquet"])
async def test_the_screens_own_accept_takes_shifted_off_its_row(tmp_path, suffix):
    book = second_cycle_shifted(tmp_path)
    app = app_on(tmp_path, book, suffix)
    async with app.run_test(size=(80, 24)) as pilot:
        s = await on_series(app, pilot, {"product": ACCEPTED})
        session = app.session
        assert "shifted" in row(app, ACCEPTED) and "shifted" in row(app, LEFT)
        await pilot.press("a")
        await pilot.pause()
        assert "despite shifted?" in screen_text(app)
        await pilot.press(*"checked", "enter")
        await until(pilot, lambda: session.status[s] == "accepted")
        await pilot.pause()
        assert "shifted" not in row(app, ACCEPTED)
        assert not session.diagnosis.flagged("shifted")[s] and session.backtest_of(s) is None
        assert "shifted" in row(app, LEFT)


OTHER = """
import sys
from pathlib import Path
from fitcore.ledger import Identity
from fitcore.results.source import source_from_results
from tui.factory import open_session
folder = Path(sys.argv[1])
session = open_session(source_from_results(folder / "r2.json"), folder / "ledger.jsonl", Identity("bo", "bo", "h"))
shown = session.look(int(session.keys.indices_of([{"product": sys.argv[2]}])[0]))
other = next(name for name in session.results.names if name != shown.proposed)
session.decide(shown, "override", model=other, note="from another screen")
"""


@pytest.mark.parametrize("suffix", [".json", ".parquet"])
async def test_another_analysts_decision_takes_shifted_off_the_row(tmp_path, suffix):
    book = second_cycle_shifted(tmp_path)
    theirs, kept = LEFT, ACCEPTED  # (rows whose flags fit 80 columns: OVERRIDDEN's are cut to '+3')
    app = app_on(tmp_path, book, suffix)
    async with app.run_test(size=(80, 24)) as pilot:
        k = await on_series(app, pilot, {"product": kept})  # the cursor elsewhere: the row decided is not shown
        session = app.session
        o = int(session.keys.indices_of([{"product": theirs}])[0])
        assert "shifted" in row(app, theirs)
        subprocess.run([sys.executable, "-c", OTHER, str(tmp_path), theirs], cwd=ROOT, check=True)
        await until(pilot, lambda: session.status[o] == "overridden")  # the screen looks every 2 s
        await pilot.pause()
        assert "shifted" not in row(app, theirs)
        assert not session.diagnosis.flagged("shifted")[o] and session.backtest_of(o) is None
        assert "shifted" in row(app, kept) and session.diagnosis.flagged("shifted")[k]


@pytest.mark.parametrize("suffix", [".json", ".parquet"])
def test_a_revoke_of_the_decision_made_since_brings_the_backtest_back_as_show_has_it(tmp_path, suffix, capsys):
    from pricefold.cli import main
    from tui.factory import open_session
    book = second_cycle_shifted(tmp_path)
    results = tmp_path / f"r2{suffix}"
    session = (open_session(source_from_results(results), book, ANA) if suffix == ".json"
               else open_stored_session(results, book, ANA))
    s = int(session.keys.indices_of([{"product": ACCEPTED}])[0])
    session.decide(session.look(s), "accept", note="checked")
    assert "shifted" not in session.flag_codes(s)
    session.decide(session.look(s), "revoke", note="asked again")  # the decision tested stands again
    assert session.status[s] == "stale" and "shifted" in session.flag_codes(s) and session.backtest_of(s)
    capsys.readouterr()
    assert main(["show", str(results), "--ledger", str(book), "--product", ACCEPTED]) == 0
    assert "] shifted:" in capsys.readouterr().out
