"""An override carried to the next cycle, on the triage screen: the list, the header's counts, the plan
line and the candidate table show the overridden model (its numbers against statsmodels OLS
``get_prediction``), and an analyst may still replace it with the proposal."""
from __future__ import annotations

import io
import re

import pytest

from fitcore import ledger
from fitcore.results.source import source_from_results
from tests.cli.test_carried_override import NOTE, carried_override, quadratic_at_plan
from tests.tui.conftest import assert_prediction_on_screen, make_app, screen_text, started
from tui.widgets.evidence import EvidencePanel


@pytest.fixture(scope="module")
def carried(tmp_path_factory):
    return carried_override(tmp_path_factory.mktemp("carried-screen"))


def screen_on(carried, tmp_path):
    """``(app, ledger copy)``: the triage screen on the second cycle's results, on a copy of the ledger."""
    book, _, _, results = carried
    copy = tmp_path / "ledger.jsonl"
    copy.write_bytes(book.read_bytes())
    return make_app(copy, source_from_results(results)), copy


async def test_a_carried_override_shows_its_own_curve(carried, tmp_path):
    _, key, data, _ = carried
    app, copy = screen_on(carried, tmp_path)
    async with app.run_test(size=(160, 50)) as pilot:
        session = await started(app, pilot)
        s = int(session.keys.indices_of([key])[0])
        names = session.results.names
        assert session.status[s] == "overridden" and names[session.model_of(s)] == "poly2"
        assert names[int(session.results.chosen[s])] == "poly1"
        assert session.counts()["overridden"] == 1 and session.counts()["accepted"] == 0
        session.set_filter("all", None)
        session.bring(s)
        app.screen.refresh_all()
        await pilot.pause(0.5)
        text = screen_text(app)
        row = next(line for line in text.splitlines() if key["product"] in line and "obs" not in line)
        assert row.lstrip().startswith("↺") and " poly2 " in row
        assert "overridden 1" in text and "status overridden: bo" in text
        reference = quadratic_at_plan(data, key["product"])  # statsmodels OLS get_prediction
        assert_prediction_on_screen(text, "poly2", reference)
        assert "Overridden to poly2" in text and NOTE in text  # the override's own words, carried with it
        table = _plain(app.screen.query_one(EvidencePanel).candidate_table(s))  # below the charts: off screen
        assert re.search(r"✓\s+poly1", table) and re.search(r"↺\s+poly2", table)  # proposal; the model that stands

        # Another analyst replaces the carried override with the proposal: asked first (one key replaced a
        # colleague's decision unasked: a trial), then recorded, and the screen follows.
        assert session.current == s
        await pilot.press("a")
        await pilot.pause(0.3)
        assert "This replaces what stands" in screen_text(app) and ledger.Ledger(copy).records[-1]["action"] != "accept"
        await pilot.press("up", "enter")
        await pilot.pause(0.3)
        written = ledger.Ledger(copy).records[-1]
        assert written["action"] == "accept" and written["model"] == "poly1" and written["series"] == key
        assert session.status[s] == "accepted" and names[session.model_of(s)] == "poly1"


def _plain(renderable) -> str:
    from rich.console import Console
    console = Console(width=100, record=True, file=io.StringIO())
    console.print(renderable)
    return console.export_text()


async def test_the_filter_menu_counts_agree_with_the_header(carried, tmp_path):
    """The header counts statuses (pending: no decision at all; stale: a decision on other data); the list's
    "pending" choice lists both, so its title says so and its count is their sum."""
    app, _ = screen_on(carried, tmp_path)
    async with app.run_test(size=(160, 50)) as pilot:
        session = await started(app, pilot)
        counts = session.counts()
        assert counts["pending"] > 0 and counts["stale"] == 1  # the held series, on the first cycle's data
        header = "\n".join(screen_text(app).splitlines()[:2])
        assert f"pending {counts['pending']}" in header and f"stale {counts['stale']}" in header
        await pilot.press("f")
        await pilot.pause()
        menu = screen_text(app)
        assert f"undecided: pending or stale  ({counts['pending'] + counts['stale']})" in menu
        assert f"needs a decision  ({counts['attention']})" in menu
        await pilot.press("escape")
        session.set_filter("pending")
        assert len(session.view) == counts["pending"] + counts["stale"]
