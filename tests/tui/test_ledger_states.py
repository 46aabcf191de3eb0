"""A ledger the screen cannot trust is shown read-only: said in the header, no decision key acts."""
from __future__ import annotations

import json

import pytest

from fitcore import ledger
from tests.tui.conftest import ANA, make_app, screen_text, started, until


def one_record(ledger_path, key=None):
    from tui.factory import open_session, sample_source
    session = open_session(sample_source(), ledger_path, ANA, key)
    s = int(session.view[0])
    session.decide(session.look(s), "hold")
    return s


async def test_an_older_copy_put_back_under_the_screen_is_not_called_broken(ledger_path):
    """A trial restored an older copy of the ledger while a screen was open: the screen turned read-only (right:
    records it had read were gone) but called the ledger "broken", where 'ledger verify' said "intact"."""
    from tui.factory import open_session, sample_source
    session = open_session(sample_source(), ledger_path, ANA, None)
    s, t = int(session.view[0]), int(session.view[1])
    session.decide(session.look(s), "hold")
    older = ledger_path.read_bytes()
    session.decide(session.look(t), "hold")
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        await started(app, pilot)
        ledger_path.write_bytes(older)  # the backup put back: a shorter chain that verifies
        said = "READ-ONLY: the ledger changed under this screen: records read"  # the line cut at 80 columns
        await until(pilot, lambda: said in screen_text(app))
        assert "broken" not in screen_text(app)
        await pilot.press("question_mark")
        await pilot.pause()
        await pilot.press("end")
        await pilot.pause()
        assert "changed under this screen: line 2" in " ".join(screen_text(app).split())
    assert ledger.Ledger(ledger_path).state == ledger.INTACT


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

    import tui.deciding
    one_record(ledger_path)
    before = ledger_path.read_bytes()
    real = os.access
    monkeypatch.setattr(tui.deciding.os, "access", lambda path, mode: False if str(path) == str(ledger_path)
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

    import tui.deciding
    one_record(ledger_path)
    real_access, real_statvfs = os.access, os.statvfs

    class ReadOnly:
        f_flag = os.ST_RDONLY

    monkeypatch.setattr(tui.deciding.os, "access", lambda path, mode: False if str(path) == str(ledger_path)
                        else real_access(path, mode))
    monkeypatch.setattr(tui.deciding.os, "statvfs", lambda path: ReadOnly() if str(path) == str(ledger_path)
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


def six_holds(ledger_path):
    """Six holds by ana on the first six listed series; the session, for more."""
    from tui.factory import open_session, sample_source
    session = open_session(sample_source(), ledger_path, ANA)
    for s in [int(i) for i in session.view[:6]]:
        session.decide(session.look(s), "hold")
    return session


def test_an_open_session_refuses_a_decision_after_an_edit_in_place(ledger_path):
    # The screen's session stays open while line 2 is edited in another terminal, its length kept.
    # Seen by the look before the decision (the file's time moved) or, if the edit fell in the same clock tick
    # as the last append, by the append itself: refused either way, naming the line.
    from fitcore.errors import PricefoldError
    from tests.fitcore.ledger_support import edit_in_place
    session = six_holds(ledger_path)
    s = int(session.view[0])
    edit_in_place(ledger_path, 2, b'"analyst":"ana"', b'"analyst":"rob"')
    edited = ledger_path.read_bytes()
    with pytest.raises(PricefoldError, match=r"line 2: record was edited: its digest does not match its content"):
        session.decide(session.look(s), "hold", note="ask the buyer")
    assert ledger_path.read_bytes() == edited and not session.writable


async def test_a_hold_after_an_edit_in_place_is_refused_and_the_screen_turns_read_only(ledger_path):
    # As a trial did it: the hold's note dialog confirmed after line 4 was edited, its length kept (not the
    # last record, which an older check saw). Here its modification time is put back too, so no look of the
    # screen sees it first: the append itself refuses.
    from tests.fitcore.ledger_support import edit_in_place
    six_holds(ledger_path)
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        await started(app, pilot)
        assert "READ-ONLY" not in screen_text(app)
        edit_in_place(ledger_path, 4, b'"analyst":"ana"', b'"analyst":"rob"', keep_mtime=True)
        edited = ledger_path.read_bytes()
        await pilot.press("h", *"ask the buyer", "enter")
        await until(pilot, lambda: "Not recorded" in screen_text(app))
        text = " ".join(screen_text(app).split())
        # read-only from now on, no note box will open: the note itself is shown to be copied
        assert "line 4: record was edited" in text
        assert "Nothing can be recorded now; your note was: ask the buyer" in text
        await pilot.press("escape")
        await until(pilot, lambda: "READ-ONLY: the ledger is broken (line 4" in screen_text(app))
        footer = screen_text(app).splitlines()[-1]
        assert "h hold" not in footer and "a accept" not in footer
    assert ledger_path.read_bytes() == edited


async def test_a_ledger_in_a_folder_that_does_not_exist_says_so_not_permissions(tmp_path):
    """``--ledger nodir/L.jsonl``: the header read "you may not write to the ledger file (permissions)"."""
    ledger_path = tmp_path / "nodir" / "ledger.jsonl"
    app = make_app(ledger_path)
    async with app.run_test(size=(120, 30)) as pilot:
        await started(app, pilot)
        await until(pilot, lambda: "READ-ONLY: the ledger's folder" in screen_text(app))
        assert f"{ledger_path.parent} does not exist" in " ".join(screen_text(app).split())
    assert not ledger_path.parent.exists()
