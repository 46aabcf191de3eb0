"""The screen on a ledger whose last append was cut off, and Ctrl+C inside a dialog.

What a reader says of an interrupted tail is ``fitcore.ledger``'s own sentence (checked against ``pricefold
ledger verify`` in ``tests/cli``); here: the screen says it before any decision, ``?`` does not call the ledger
simply intact, and the next decision moves the tail to the side file the screen named.
"""
from __future__ import annotations

import io
import os
from pathlib import Path

from rich.console import Console

from pricefold.cli import main
from tui.help import ledger_text
from tui.screens.dialogs import TextDialog

from .conftest import make_app, screen_text, started, until

SAMPLE = Path(__file__).resolve().parents[2] / "sample"


def cut_off(path: Path) -> None:
    """A ledger of one batch whose last 100 bytes never reached the disk (as ``truncate -s -100``)."""
    assert main(["ledger", "accept-unflagged", str(SAMPLE / "results.parquet"), "--ledger", str(path), "-q"]) == 0
    os.truncate(path, path.stat().st_size - 100)


async def test_a_cut_off_ledger_is_said_before_any_decision_and_the_next_one_sets_it_aside(ledger_path):
    """Before: nothing on screen, '?' said 'intact', and the first hold moved every record to a side file."""
    cut_off(ledger_path)
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24), notifications=True) as pilot:
        session = await started(app, pilot)
        text = " ".join(screen_text(app).split())
        assert "ledger.jsonl's last append was cut off: line 1: incomplete batch (" in text
        assert "torn last line (" in text
        assert "the next decision moves it to ledger.jsonl.torn-<UTC time>" in text
        console = Console(width=200, record=True, file=io.StringIO())
        console.print(ledger_text(session.book))  # what '?' ends with
        said = " ".join(console.export_text().split())
        assert "intact up to its last whole record, but ledger.jsonl's last append was cut off" in said
        assert not list(ledger_path.parent.glob("ledger.jsonl.torn-*"))
        await pilot.press("h")
        await until(pilot, lambda: isinstance(app.screen, TextDialog))
        await pilot.press("enter")
        await until(pilot, lambda: session.book.records)
        await pilot.pause()
        [side] = list(ledger_path.parent.glob("ledger.jsonl.torn-*"))
        assert "cut off" not in " ".join(screen_text(app).split())
        # where it went, said (a trial: the header had said where it would go, then nothing)
        assert any(f"tail after the ledger's last whole record was moved to {side.name} beside it" in n.message
                   for n in app._notifications)


async def test_ctrl_c_in_a_note_dialog_leaves_and_a_typed_note_takes_a_second_press(ledger_path):
    """Before: Ctrl+C in the dialog did nothing (the text field took it as copy)."""
    for typed in ("", "check the promotion weeks"):
        app = make_app(ledger_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await started(app, pilot)
            await pilot.press("h")
            await until(pilot, lambda: isinstance(app.screen, TextDialog))
            if typed:
                await pilot.press(*typed)
                await pilot.press("ctrl+c")
                await pilot.pause()
                assert isinstance(app.screen, TextDialog) and app.return_code is None
                assert "Ctrl+C again leaves pricefold without recording this note" in screen_text(app)
            await pilot.press("ctrl+c")
            await pilot.pause()
            assert app.return_code == (130 if typed else 0)  # a note dropped: an interrupt (test_new_user_traps)
        assert not ledger_path.exists() or not ledger_path.read_bytes()


async def test_a_ledger_without_its_final_line_end_is_said_so_and_the_next_decision_ends_it(ledger_path):
    """A trial's screen said "last append was cut off … the next decision moves it to ….torn-<UTC time>" of a ledger
    that only lacked its final newline — the decision ends the line and counts the batch, no side file."""
    assert main(["ledger", "accept-unflagged", str(SAMPLE / "results.parquet"), "--ledger", str(ledger_path),
                 "-q"]) == 0
    accepted = len(ledger_path.read_text().splitlines())
    os.truncate(ledger_path, ledger_path.stat().st_size - 1)
    app = make_app(ledger_path)
    async with app.run_test(size=(100, 30)) as pilot:
        session = await started(app, pilot)
        text = " ".join(screen_text(app).split())
        assert "ledger.jsonl: line " in text and "the last record has no line end" in text
        assert "cut off" not in text and "torn-" not in text
        await pilot.press("h")
        await until(pilot, lambda: isinstance(app.screen, TextDialog))
        await pilot.press("enter")
        await until(pilot, lambda: len(session.book.records) == accepted + 1)
    assert not list(ledger_path.parent.glob("ledger.jsonl.torn-*"))


async def test_a_tail_torn_while_the_screen_is_open_is_said_on_the_header_and_where_it_went(ledger_path):
    """A trial: with the screen open, a torn line appended to the ledger reached only ``?``; the header, which says
    it when the screen opens on such a file, stayed as it was.  Now the next look says it there, and once a decision
    has moved it aside the header names the side file (as the command line and the notification do)."""
    assert main(["ledger", "accept-unflagged", str(SAMPLE / "results.parquet"), "--ledger", str(ledger_path),
                 "-q"]) == 0
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        session = await started(app, pilot)
        assert "cut off" not in " ".join(screen_text(app).split())
        with open(ledger_path, "ab") as handle:  # as `printf '{"action":"hold","analyst":"ghost"' >> L.jsonl`
            handle.write(b'{"action":"hold","analyst":"ghost"')
        app.screen.poll_ledger()  # the screen's look, every 2 s
        await pilot.pause()
        text = " ".join(screen_text(app).split())
        assert "ledger.jsonl's last append was cut off: line " in text and "torn last line (34 bytes" in text
        assert "the next decision moves it to ledger.jsonl.torn-<UTC time>" in text
        await pilot.press("h")
        await until(pilot, lambda: isinstance(app.screen, TextDialog))
        await pilot.press("enter")
        await until(pilot, lambda: session.book.tail_moved_to is not None)
        await pilot.pause()
        [side] = list(ledger_path.parent.glob("ledger.jsonl.torn-*"))
        assert side.read_bytes() == b'{"action":"hold","analyst":"ghost"'
        text = " ".join(screen_text(app).split())
        assert "cut off" not in text
        assert f"ledger.jsonl: the interrupted tail after its last whole record was moved to {side.name} beside " \
               "it" in text
        header, asked = app.screen.query_one("#status-line"), []
        update = header.update
        header.update = lambda text, layout=True: asked.append(layout) or update(text, layout=layout)
        with open(ledger_path, "ab") as handle:  # torn again: the header's notice grows from two lines to three
            handle.write(b'{"action":"note","analy')
        await until(pilot, lambda: session.book.notes)  # the screen's own look
        await pilot.pause()
        text = " ".join(screen_text(app).split())
        assert "torn last line (23 bytes" in text
        assert "the next decision moves it to ledger.jsonl.torn-<UTC time>" in text
        # laid out again, though its count of lines is the same: in tmux the third line was cut (or covered the list's
        # heading) until something else laid the screen out
        assert asked and asked[-1] is True and "series n model score flags" in text
