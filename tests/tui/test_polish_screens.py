"""Small faults new users met on the triage screen, each checked where it was seen: a note over the help, the
header's name at 100 columns, the override dialog's interval at 60×20, names cut in the two-pane list."""
from __future__ import annotations

from textual.widgets._toast import Toast

from pricefold.demo import COMPILING_NOTE
from tests.tui.conftest import make_app, screen_text, started, until
from tui.screens.dialogs import MessageDialog


async def test_a_note_that_arrives_while_the_help_is_open_leaves_the_help_whole(ledger_path):
    """The compiling note (a ten-second warning on the first run) came over the help's last lines."""
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24), notifications=True) as pilot:
        await started(app, pilot)
        await pilot.press("question_mark")
        await pilot.pause()
        assert isinstance(app.screen, MessageDialog)
        app.notify(COMPILING_NOTE, severity="warning", timeout=10, markup=False)
        await until(pilot, lambda: bool(app.screen.query(Toast)))
        await pilot.pause()
        dialog = app.screen.query_one(".dialog").region
        toasts = [toast.region for toast in app.screen.query(Toast)]
        assert toasts and all(toast.height > 0 for toast in toasts)
        assert not any(dialog.overlaps(toast) for toast in toasts), (dialog, toasts, screen_text(app))
