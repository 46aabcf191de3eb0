"""``triage RESULTS --ledger OTHER`` on results fitted against another ledger: recorded where asked, and the
header names both ledgers for as long as the screen is open (a trial: on JSON results a notification said it,
gone in 10 s, and the header named no ledger).  One line for JSON and Parquet results alike
(``TriageSession.fitted_elsewhere``); at 80×24 and 120×40."""
from __future__ import annotations

from pathlib import Path

import pytest

from fitcore import ledger
from tests.cli.test_default_ledger_refused import second_cycle
from tests.tui.conftest import screen_text, started, until
from tui.app import TriageApp
from tui.factory import open_session, source_from_results


@pytest.fixture(scope="module")
def cycle(tmp_path_factory):
    folder = tmp_path_factory.mktemp("fitted")
    return folder, second_cycle(folder)


def header(app) -> str:
    """The screen's lines above the list's column titles, as one text."""
    lines = screen_text(app).splitlines()
    titles = next(i for i, line in enumerate(lines) if line.lstrip().startswith("series "))
    return " ".join(" ".join(lines[:titles]).split())


@pytest.mark.parametrize("size", [(80, 24), (120, 40)])
async def test_the_header_names_the_ledger_recorded_into_and_the_one_fitted_against(cycle, tmp_path, monkeypatch,
                                                                                    size):
    folder, book = cycle
    monkeypatch.chdir(tmp_path)
    other = Path("other.jsonl")  # as typed after --ledger
    before = book.read_bytes()
    source = source_from_results(folder / "r2.json")
    ana = ledger.Identity("ana", "ana", "h")
    app = TriageApp(lambda progress: open_session(source, other, ana, None, progress))
    async with app.run_test(size=size) as pilot:
        session = await started(app, pilot)
        said = header(app)
        assert f"Recording into other.jsonl (no decisions yet), not {book}" in said, said
        session.set_filter("all", None)  # every series unflagged: none listed as needing a decision
        app.screen.refresh_all()
        await pilot.pause()
        await pilot.press("h")
        await until(pilot, lambda: "Hold " in screen_text(app))
        await pilot.press("enter")
        await until(pilot, lambda: session.counts()["held"] == 1)
        app.screen.refresh_all()
        await pilot.pause()
        said = header(app)  # still there after the decision, which went to the ledger given
        assert f"Recording into other.jsonl, not {book}" in said, said
        assert [r["action"] for r in ledger.Ledger(other).records] == ["hold"] and book.read_bytes() == before
        await pilot.press("question_mark")
        await pilot.pause()
        await pilot.press("end")
        await until(pilot, lambda: "Ledger other.jsonl" in screen_text(app))
        text = " ".join(screen_text(app).replace("│", " ").split())
        assert (f"Recording into other.jsonl, not {book}, the ledger these results were fitted against "
                "(backtested again here, against other.jsonl)") in text  # in full under ?
