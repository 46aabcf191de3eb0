"""``NO_COLOR`` set (any value; the convention analysts put in a shell's rc file): the screen opens in monochrome.
A trial: triage and demo crashed on launch in a ~490-line traceback — Textual's monochrome filter reads each
segment's style, and the list's rows held a segment without one."""
from __future__ import annotations

import pytest

from tests.tui.conftest import make_app, screen_text, started


@pytest.mark.parametrize("value", ["1", ""])
async def test_the_screen_opens_and_every_pane_draws_under_no_color(ledger_path, monkeypatch, value):
    monkeypatch.setenv("NO_COLOR", value)
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        session = await started(app, pilot)
        assert app.no_color and session.label(session.current) in screen_text(app)
        for keys in (["enter"], ["escape", "question_mark"], ["escape", "f"], ["escape", "o"], ["escape", "a"]):
            await pilot.press(*keys)  # the evidence, the help, the filter, the override and accept dialogs
            await pilot.pause()
    assert app.return_code in (None, 0)
