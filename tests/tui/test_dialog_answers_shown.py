"""Every dialog that asks keeps its answer on screen — the choices or the note box, and the keys' hint — however
long its question and however small the terminal: the question scrolls (PgUp/PgDn), the answer stays.  At 60×20
a look-alike's confirmation ended at its question and the top of the choice list, while ↑ Enter recorded an
accept on an unseen "Yes"."""
from __future__ import annotations

import csv
from pathlib import Path

import pytest

from fitcore.data.columns import Columns
from tui.factory import Source
from tui.screens.dialogs import ChoiceDialog, TextDialog

from .conftest import make_app, screen_text, started, until
from .test_key_columns_screen import SAMPLE

LONG = "apples " + "from the orchard on the hill beyond the river " * 4 + "1 kg"  # about 200 characters


def renamed(folder: Path, name: str, only: bool = False, product: str = "apples 1 kg") -> Path:
    """The sample with ``product``'s North series named ``name`` (``only``: that series' rows alone), a CSV file."""
    path = folder / f"{name[:8]}-{only}.csv"
    with open(SAMPLE / "wholesale.csv", newline="") as src, open(path, "w", newline="") as out:
        rows = csv.DictReader(src)
        write = csv.DictWriter(out, rows.fieldnames)
        write.writeheader()
        for row in rows:
            north = row["product"] == product and row["region"] == "North"
            if north or not only:
                write.writerow({**row, "product": name} if north else row)
    return path


def look_alike(folder: Path, ledger_path: Path, name: str) -> Source:
    """A ledger holding one series, ``name`` · North, accepted; and the sample with that series spelled with a
    capital (no series of the ledger's shared, and that one a look-alike): the trial's case."""
    from pricefold.cli import main
    fitted = folder / "one.parquet"
    assert main(["fit", str(renamed(folder, name, only=True)), "--segment", "region", "--date", "week",
                 "-o", str(fitted), "-q"]) == 0
    assert main(["ledger", "accept-unflagged", str(fitted), "--ledger", str(ledger_path), "-q"]) == 0
    return Source(data=renamed(folder, name.capitalize()), columns=Columns(segments=("region",), date="week"))


def answer_on_screen(app, *lines: str) -> None:
    """Each of ``lines`` on screen inside the dialog (wrapped or not)."""
    text, dialog = screen_text(app), app.screen.query_one(".dialog").region
    assert dialog.bottom <= app.size.height, (dialog, text)
    inside = [row[dialog.x + 1:dialog.right - 1] for row in text.splitlines()[dialog.y:dialog.bottom]]
    words = " ".join(" ".join(inside).split())
    for line in lines:
        assert line in words, text


@pytest.mark.parametrize("size, name", [((60, 20), "apples 1 kg"), ((80, 24), LONG)])
async def test_a_look_alikes_confirmation_shows_its_choices_and_hint(ledger_path, tmp_path, size, name):
    source = look_alike(tmp_path, ledger_path, name)
    before = ledger_path.read_bytes()
    app = make_app(ledger_path, source)
    async with app.run_test(size=size) as pilot:
        session = await started(app, pilot)
        session.set_filter("all", None)
        session.cursor = next(i for i, s in enumerate(session.view)
                              if session.results.data.key_of(int(s))["product"] == name.capitalize())
        app.screen.refresh_all()
        await pilot.pause()
        await pilot.press("a")
        await until(pilot, lambda: isinstance(app.screen, ChoiceDialog))
        await until(pilot, lambda: "PgDn/PgUp: the whole question" in screen_text(app))  # cut: as the test means
        answer_on_screen(app, "Yes: ", "No: record nothing (Esc)", "Enter to choose · Esc to cancel")
        for _ in range(10):
            await pilot.press("pagedown")
        await pilot.pause()
        answer_on_screen(app, "Is that what you mean?", "Yes: ", "No: record nothing (Esc)")
        assert app.screen.query_one("#dialog-options").highlighted == 1  # PgDn read on, never moved the choice
        await pilot.press("escape")
        await until(pilot, lambda: not isinstance(app.screen, ChoiceDialog))
        assert ledger_path.read_bytes() == before


async def note_box(app, pilot, flow: str) -> None:
    """Open the note box of ``flow`` on the sample's first listed series (a stop flag: its accept needs a note)."""
    session = await started(app, pilot)
    assert session.severity(int(session.view[session.cursor])) == "stop"
    if flow == "accept":
        await pilot.press("a")
    else:
        await pilot.press("o")
        await until(pilot, lambda: app.screen.query("#dialog-options"))
        await pilot.press("down", "enter")
    await until(pilot, lambda: isinstance(app.screen, TextDialog))
    await pilot.pause()


@pytest.mark.parametrize("flow", ["accept", "override"])
async def test_a_note_box_keeps_its_field_and_hint_at_60x20(ledger_path, flow):
    """At 60×20 the note box of an accept past a stop flag, and of an override, lost "Enter to confirm · Esc to
    cancel" under the numbers it signs."""
    app = make_app(ledger_path)
    async with app.run_test(size=(60, 20)) as pilot:
        await note_box(app, pilot, flow)
        for _ in range(5):  # a layout a step while it does not fit (``Asking._fit``)
            await pilot.pause()
        answer_on_screen(app, "Enter to confirm · Esc to cancel")
        field = app.screen.query_one("#dialog-input").region
        assert field.height == 3 and field.bottom <= app.screen.query_one(".dialog").content_region.bottom
        await pilot.press("n", "o", "t", "e")
        await pilot.pause()
        assert "note" in screen_text(app)  # typed where it shows
        await pilot.press("escape")

