"""SIGTERM (a kill) and SIGHUP (the SSH link dropped) end the screen as ``q`` does: the terminal given back and one
line said.  Before, either ended the process at once, the terminal left in the screen's mode, nothing said (a trial:
the shell's next prompt drawn into the old screen)."""
from __future__ import annotations

import os
import signal

import pytest

from pricefold import triage_cli

from .conftest import make_app, started, until


@pytest.mark.parametrize("number", [signal.SIGTERM, signal.SIGHUP])
async def test_a_kill_or_a_dropped_link_ends_the_screen_as_q_does(ledger_path, number):
    came: list[int] = []
    previous = signal.signal(number, lambda signum, frame: came.append(signum))  # the old code: caught here, not fatal
    try:
        app = make_app(ledger_path)
        async with app.run_test(size=(80, 24)) as pilot:
            await started(app, pilot)
            os.kill(os.getpid(), number)
            await until(pilot, lambda: app.return_code is not None, seconds=3)
        assert app.stopped_by == number and app.return_code == 128 + number and came == []
    finally:
        signal.signal(number, previous)


def test_the_command_says_what_stands(ledger_path, monkeypatch, capsys):
    class Stopped:
        failure, return_code, stopped_by, note_lost = None, 143, signal.SIGTERM, True

        def run(self):
            pass
    monkeypatch.setattr(triage_cli, "triage_app", lambda *a, **kw: Stopped())
    monkeypatch.setattr("pricefold.terminal.require_terminal", lambda what: None, raising=False)
    ledger_path.write_text("")
    assert triage_cli.open_triage(None, ledger_path, "ana") == 143
    assert capsys.readouterr().err == (f"pricefold triage: stopped by SIGTERM; decisions are in {ledger_path} (the "
                                       "note being typed was not recorded)\n")
    Stopped.note_lost = False  # no note box open: no word of a note
    assert triage_cli.open_triage(None, ledger_path, "ana") == 143
    assert capsys.readouterr().err == f"pricefold triage: stopped by SIGTERM; decisions are in {ledger_path}\n"
    # Ctrl+C leaving a typed note unrecorded (its second press in the box): said as SIGTERM's is, exit 128 + SIGINT's 2
    # (a trial: exit 0 and only "decisions are in L.jsonl")
    Stopped.return_code, Stopped.stopped_by, Stopped.note_lost = 130, None, True
    assert triage_cli.open_triage(None, ledger_path, "ana") == 130
    assert capsys.readouterr().err == (f"pricefold triage: interrupted; decisions are in {ledger_path} (the note "
                                       "being typed was not recorded)\n")
