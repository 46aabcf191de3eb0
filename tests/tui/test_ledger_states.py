"""A ledger the screen cannot trust is shown read-only: said in the header, no decision key acts."""
from __future__ import annotations

import json

from fitcore import ledger
from tests.tui.conftest import ANA, make_app, screen_text, started, until


def one_record(ledger_path, key=None):
    from tui.factory import open_session, sample_source
    session = open_session(sample_source(), ledger_path, ANA, key)
    s = int(session.view[0])
    session.decide(session.look(s), "hold")
    return s


async def test_a_broken_ledger_makes_the_screen_read_only(ledger_path):
    one_record(ledger_path)
    record = json.loads(ledger_path.read_text())
    record["analyst"] = "mallory"  # an edit the chain detects
    ledger_path.write_text(json.dumps(record) + "\n")
    before = ledger_path.read_bytes()
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        await started(app, pilot)
        await until(pilot, lambda: "READ-ONLY: the ledger is broken (line 1" in screen_text(app))
        footer = screen_text(app).splitlines()[-1]
        assert "q quit" in footer and "a accept" not in footer and "h hold" not in footer
        await pilot.press("a", "h", "enter", "n")
        await pilot.pause()
        await pilot.press("question_mark")
        await pilot.pause()
        await pilot.press("end")
        await pilot.pause()
        assert "head (sequence number" in screen_text(app) and "broken: line 1" in screen_text(app)
    assert ledger_path.read_bytes() == before


async def test_a_ledger_this_user_may_not_write_is_read_only_before_a_note_is_typed(ledger_path, monkeypatch):
    # A 0444 ledger once offered every decision key and refused only after the note was typed.
    # (Root ignores file modes, so the OS's answer is what the test sets.)
    import os

    import tui.session
    one_record(ledger_path)
    before = ledger_path.read_bytes()
    real = os.access
    monkeypatch.setattr(tui.session.os, "access", lambda path, mode: False if str(path) == str(ledger_path)
                        else real(path, mode))
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        await started(app, pilot)
        await until(pilot, lambda: "READ-ONLY: you may not write to the ledger file" in screen_text(app))
        footer = screen_text(app).splitlines()[-1]
        assert "a accept" not in footer and "h hold" not in footer and "q quit" in footer
        await pilot.press("a", "h")
        await pilot.pause()
        assert type(app.screen).__name__ == "TriageScreen"  # no note dialog opened
    assert ledger_path.read_bytes() == before


async def test_a_ledger_on_a_read_only_mount_says_so_not_permissions(ledger_path, monkeypatch):
    """The OS refuses the write for the mount, not the user's rights: the header says which (a trial on a
    read-only mount read "permissions" while the command line said "Read-only file system")."""
    import os

    import tui.session
    one_record(ledger_path)
    real_access, real_statvfs = os.access, os.statvfs

    class ReadOnly:
        f_flag = os.ST_RDONLY

    monkeypatch.setattr(tui.session.os, "access", lambda path, mode: False if str(path) == str(ledger_path)
                        else real_access(path, mode))
    monkeypatch.setattr(tui.session.os, "statvfs", lambda path: ReadOnly() if str(path) == str(ledger_path)
                        else real_statvfs(path))
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        await started(app, pilot)
        await until(pilot, lambda: "READ-ONLY: the ledger's file system is mounted read-only" in screen_text(app))


async def test_the_help_names_the_ledger_and_its_head(ledger_path):
    one_record(ledger_path)
    head = ledger.Ledger(ledger_path).head_text
    app = make_app(ledger_path)
    async with app.run_test(size=(160, 50)) as pilot:
        await started(app, pilot)
        assert "READ-ONLY" not in screen_text(app)
        await pilot.press("question_mark")
        await pilot.pause()
        await pilot.press("end")
        await pilot.pause()
        text = screen_text(app)
        assert head in text and "intact" in text
