"""Every key of the triage screen, at 80×24 and 160×50, checked on the ledger and on screen."""
from __future__ import annotations

import json

import numpy as np
import pytest

from fitcore import ledger as fledger
from fitcore.review.flags import CODES, SEVERITY
from tui.listing import FILTERS
from tests.tui.conftest import make_app, screen_text, started, until

SIZES = [(80, 24), (160, 50)]


def records(path):
    return [json.loads(line) for line in path.read_text().splitlines()] if path.exists() else []


def unflagged_position(session) -> int:
    """Show all series and put the cursor on the first one without any flag."""
    session.set_filter("all", None)
    return int(np.flatnonzero(~session.diagnosis.raised.any(axis=1)[session.view])[0])


@pytest.mark.parametrize("size", SIZES)
async def test_first_screen_lists_the_series_needing_attention(ledger_path, size):
    app = make_app(ledger_path)
    async with app.run_test(size=size) as pilot:
        session = await started(app, pilot)
        text = screen_text(app)
        attention = int(session.needs_attention().sum())
        assert f"{attention} listed (needs a decision; by attention)" in text
        assert session.cursor == 0 and session.shown.series == session.view[0]  # the top row, and what is shown
        first = session.label(session.view[0])
        assert first in text and session.flag_codes(session.view[0])[0] in text
        assert "a accept" in text and "q quit" in text
        assert "u revoke" not in text  # nothing of ana's to revoke yet: the key is hidden
        if size == (160, 50):
            assert "Proposed poly0 (one-se)" in text and "(chosen)" in text  # evidence beside the list
        else:
            assert "Proposed" not in text  # narrow: the list alone until Tab


@pytest.mark.parametrize("size", SIZES)
async def test_accept_past_a_stop_flag_asks_why_then_records_and_moves_on(ledger_path, size):
    app = make_app(ledger_path)
    async with app.run_test(size=size) as pilot:
        session = await started(app, pilot)
        first, second = int(session.view[0]), int(session.view[1])
        assert SEVERITY[session.flag_codes(first)[0]] == "stop"
        listed = len(session.view)
        await pilot.press("a")
        await pilot.pause()
        assert "despite" in screen_text(app) and records(ledger_path) == []
        await pilot.press("enter")  # an empty note is refused
        await pilot.pause()
        assert "A note is required here." in screen_text(app) and records(ledger_path) == []
        await pilot.press(*"two prices only", "enter")
        await pilot.pause()
        [record] = records(ledger_path)
        assert record["action"] == "accept" and record["analyst"] == "ana" and record["note"] == "two prices only"
        assert record["series"] == session.results.data.key_of(first)
        assert record["model"] == record["proposed"] == session.results.names[session.results.chosen[first]]
        assert record["fingerprint"] == session.results.data.fingerprints[first]
        assert len(session.view) == listed - 1 and session.current == second
        assert f"{listed - 1} listed" in screen_text(app)


async def test_accept_without_flags_asks_nothing_and_a_second_accept_is_not_offered(ledger_path):
    """Once it stands accepted on this data the ledger refuses another accept ("nothing to add"): the key is hidden,
    as keys that cannot act are, not offered and then refused after a note was asked for."""
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        session = await started(app, pilot)
        session.cursor = unflagged_position(session)
        app.screen.refresh_all()
        await pilot.pause()
        s = session.current
        await pilot.press("a")
        await pilot.pause()
        assert [r["action"] for r in records(ledger_path)] == ["accept"] and session.status[s] == "accepted"
        session.bring(s)
        app.screen.refresh_all()
        await pilot.pause()
        await until(pilot, lambda: "a accept" not in screen_text(app))  # the footer redraws a frame or two later
        assert session.current == s and "o override" in screen_text(app)
        await pilot.press("a")
        await pilot.pause()
        assert "Not recorded" not in screen_text(app) and "Why accept" not in screen_text(app)
        assert len(records(ledger_path)) == 1


async def test_override_needs_a_note_and_records_the_other_candidate(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(160, 50), notifications=True) as pilot:
        session = await started(app, pilot)
        s = session.current
        await pilot.press("o")
        await pilot.pause()
        assert "Override the proposal for" in screen_text(app)
        await pilot.press("enter")  # the dialog opens on the proposal, which cannot be picked: it says so
        await pilot.pause()
        assert "Override the proposal for" in screen_text(app)
        proposed = session.results.names[int(session.results.chosen[s])]
        assert any(n.message.startswith(f"{proposed} is the proposal: move to another candidate")
                   for n in app._notifications)
        await pilot.press("down", "enter")  # the next candidate
        await pilot.pause()
        assert f"for {session.label(s)}?" in screen_text(app)  # the note's dialog names its series too
        await pilot.press("enter")  # an empty note is refused
        await pilot.pause()
        assert "A note is required here." in screen_text(app) and records(ledger_path) == []
        await pilot.press(*"promo ends")
        await pilot.press("enter")
        await pilot.pause()
        [record] = records(ledger_path)
        assert record["action"] == "override" and record["note"] == "promo ends"
        assert record["model"] != record["proposed"] and record["series"] == session.results.data.key_of(s)
        assert session.status[s] == "overridden"


@pytest.mark.parametrize("size", SIZES)
async def test_note_hold_and_revoke(ledger_path, size):
    app = make_app(ledger_path)
    async with app.run_test(size=size, notifications=True) as pilot:
        session = await started(app, pilot)
        s = session.current
        await pilot.press("u")  # nothing to revoke yet: it says so
        await pilot.pause()
        assert any("Nothing to revoke" in n.message for n in app._notifications)
        await pilot.press("n", *"call the buyer", "enter")
        await pilot.pause()
        assert [r["action"] for r in records(ledger_path)] == ["note"] and session.status[s] == "pending"
        assert session.current == s  # a note does not move on
        await pilot.press("h")
        await pilot.pause()
        assert f"Hold {session.label(s)}: why? (optional)" in screen_text(app)  # the dialog names its series
        await pilot.press("enter")  # the reason is optional
        await pilot.pause()
        assert session.status[s] == "held" and records(ledger_path)[-1]["note"] == ""
        assert session.current != s  # moved on
        assert "u revoke" in screen_text(app)
        await pilot.press("down", "down")
        await pilot.press("u")  # wherever the cursor is, the latest decision of this screen: asked first
        await pilot.pause()
        assert session.current == s and f"Revoke your hold on {session.label(s)}?" in screen_text(app)
        assert "the series is pending again" in screen_text(app)  # what stands after it
        await pilot.press("escape")  # keeps the decision
        await pilot.pause()
        assert [r["action"] for r in records(ledger_path)] == ["note", "hold"] and session.status[s] == "held"
        await pilot.press("u", *"asked too soon", "enter")
        await pilot.pause()
        assert [r["action"] for r in records(ledger_path)] == ["note", "hold", "revoke"]
        assert records(ledger_path)[-1]["note"] == "asked too soon"
        assert session.status[s] == "pending" and session.current == s
        assert any(f"Revoked your hold on {session.label(s)}" in n.message for n in app._notifications)
        assert fledger.verify(ledger_path) == []


async def test_hold_with_a_reason(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        session = await started(app, pilot)
        s = session.current
        await pilot.press("h", *"ask the buyer", "enter")
        await pilot.pause()
        [record] = records(ledger_path)
        assert record["action"] == "hold" and record["note"] == "ask the buyer" and session.status[s] == "held"


async def test_next_and_previous_attention(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        session = await started(app, pilot)
        await pilot.press("f", "down", "enter")  # all series: attention ones are spread out
        await pilot.pause()
        await pilot.press("s")
        await pilot.pause()
        await pilot.press("down", "enter")  # sort by key
        await pilot.pause()
        attention = session.needs_attention()
        await pilot.press("right_square_bracket")
        first = session.current
        assert attention[first]
        await pilot.press("right_square_bracket")
        second = session.current
        assert attention[second] and second != first
        await pilot.press("left_square_bracket")
        assert session.current == first
        assert session.label(first) in screen_text(app)


async def test_filter_shows_counts_keeps_the_status_with_a_flag_and_has_held(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(160, 50)) as pilot:
        session = await started(app, pilot)
        rising = int(session.diagnosis.flagged("rising").sum())
        await pilot.press("f")
        await pilot.pause()
        text = screen_text(app)
        assert f"needs a decision  ({int(session.needs_attention().sum())})" in text
        assert "held  (0)" in text and f"needs a decision, ⚑ rising  ({rising})" in text
        await pilot.press(*["down"] * (len(FILTERS) + 1 + CODES.index("rising")), "enter")  # statuses, any flag, flags
        await pilot.pause()
        assert session.flag_filter == "rising" and session.filter == "attention"
        assert len(session.view) == rising and all("rising" in session.flag_codes(s) for s in session.view)
        await pilot.press("f", "home", "down", "enter")  # all series: the flag stays
        await pilot.pause()
        assert session.filter == "all" and session.flag_filter == "rising"
        await pilot.press("f", "home", *["down"] * len(FILTERS), "enter")  # any flag: the status stays
        await pilot.pause()
        assert session.filter == "all" and session.flag_filter is None and len(session.view) == 180
        await pilot.press("s", "home", "down", "enter")  # by key
        await pilot.pause()
        labels = [session.label(s) for s in session.view]
        assert labels == sorted(labels) and "180 listed (all series; by key)" in screen_text(app)


async def test_search_looks_through_every_series_and_repeats(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(160, 50)) as pilot:
        session = await started(app, pilot)
        assert not any(session.label(s).startswith("apples") for s in session.view)  # none needs attention
        await pilot.press("slash", *"apples", "enter")
        await pilot.pause()
        first = session.label(session.current)
        assert first.startswith("apples") and session.filter == "all"  # the view switched to show it
        await pilot.press("slash", "enter")  # the same text again: the next match
        await pilot.pause()
        second = session.label(session.current)
        assert second.startswith("apples") and second != first
        await pilot.press("slash", "ctrl+u", *"lemons", "enter")
        await pilot.pause()
        assert session.label(session.current) == "lemons 500 g · East"


async def test_help_shows_keys_flags_and_cautions(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        await started(app, pilot)
        await pilot.press("question_mark")
        await pilot.pause()
        lines = screen_text(app).splitlines()
        enter = next(line for line in lines if "Enter " in line and "open the evidence" in line)
        esc = next(line for line in lines if "Esc " in line and "back to the list" in line)
        column = enter.index("narrow")
        assert esc.index("narrow") == column  # meanings in one column
        accept = next(i for i, line in enumerate(lines) if "accept the proposed curve" in line)
        assert lines[accept].index("accept the") == column
        following = lines[accept + 1]  # the meaning wraps at 80 columns and keeps its indent
        assert following[column - 1] == " " and following[column] != " "
        await pilot.press("end")
        await pilot.pause()
        assert "0:" + "0" * 64 in screen_text(app)  # the ledger (none yet) and its head close the help
        seen = ""
        for _ in range(4):  # back up through the cautions and the flags
            seen += screen_text(app)
            await pilot.press("pageup")
            await pilot.pause()
        assert "influential-point" in seen and "extrapolation" in seen and "you decide" in seen
        await pilot.press("escape")
        await pilot.pause()
        assert "Keys" not in screen_text(app)


async def test_quit_leaves_the_decisions_in_the_ledger(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        await started(app, pilot)
        await pilot.press("h", "enter", "q")
        await pilot.pause()
    assert app.return_code in (0, None) and len(records(ledger_path)) == 1


async def test_ctrl_c_quits_as_in_any_terminal_command_but_not_out_of_a_note(ledger_path):
    """Ctrl+C ends the app from the list (Textual's default only said to press ctrl+q); in the note
    dialog the text field keeps it, so a note being typed is not lost to it."""
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        await started(app, pilot)
        await pilot.press("n", *"why", "ctrl+c")
        await pilot.pause()
        assert app.is_running and "Note on" in screen_text(app)
        await pilot.press("escape", "ctrl+c")
        await pilot.pause()
        assert not app.is_running
    assert records(ledger_path) == [] and app.return_code in (0, None)


@pytest.mark.parametrize("key, shown", [("f", "Filter"), ("s", "Order the list by"), ("question_mark", "Keys"),
                                        ("o", "Override")])
async def test_ctrl_c_leaves_from_every_dialog(ledger_path, key, shown):
    """README: Ctrl+C leaves, also inside a dialog.  A trial pressed it three times in the filter, sort, help and
    override dialogs and the screen stayed (their lists took the key)."""
    app = make_app(ledger_path)
    async with app.run_test(size=(100, 30)) as pilot:
        await started(app, pilot)
        await pilot.press(key)
        await until(pilot, lambda: shown.lower() in screen_text(app).lower() and app.screen.is_modal)
        await pilot.press("ctrl+c")
        await pilot.pause()
        assert not app.is_running
    assert records(ledger_path) == [] and app.return_code in (0, None)


async def test_esc_with_a_key_right_behind_it_cancels_the_note_box(ledger_path):
    """Esc then / within the terminal's escape delay arrive as one key, alt+/: the note box typed '/' into the note
    and stayed open, and a trial's next words (a search) were signed as the note of an accept past stop flags."""
    from textual import events
    app = make_app(ledger_path)
    async with app.run_test(size=(100, 30)) as pilot:
        await started(app, pilot)
        await pilot.press("n", *"half typed")
        await until(pilot, lambda: "half typed" in screen_text(app))
        key = events.Key("alt+slash", "/")  # as the terminal parser makes "\x1b/" (the pilot gives it no character)
        key.set_sender(app)
        app._driver.send_message(key)
        await until(pilot, lambda: not app.screen.is_modal)  # cancelled, as Esc alone does
        await pilot.press("enter")
        await pilot.pause()
        assert "half typed" not in screen_text(app)
    assert records(ledger_path) == []


def test_the_terminal_parser_keeps_the_escape_of_esc_and_punctuation_typed_together():
    """Textual's own parser read "\x1b/" as a plain "/" (the Esc dropped), where "\x1ba" reads alt+a."""
    from textual._xterm_parser import XTermParser

    from tui.escape_keys import keep_escape_on_punctuation
    keep_escape_on_punctuation()
    keep_escape_on_punctuation()  # once is enough: a second call changes nothing

    def keys(sequence):
        parser = XTermParser()
        return [event.key for event in [*parser.feed(sequence), *parser.feed("")]]
    assert keys("\x1b/") == ["alt+slash"] and keys("\x1ba") == ["alt+a"]
    assert keys("/") == ["slash"] and keys("\x1b[A") == ["up"] and keys("\x1b") == ["escape"]


async def test_esc_and_slash_together_on_the_list_open_the_search(ledger_path):
    from textual import events
    app = make_app(ledger_path)
    async with app.run_test(size=(100, 30)) as pilot:
        await started(app, pilot)
        key = events.Key("alt+slash", "/")
        key.set_sender(app)
        app._driver.send_message(key)
        await until(pilot, lambda: "Search series by key" in screen_text(app))


async def test_ctrl_c_while_the_session_opens_is_an_interrupted_command(ledger_path):
    """While the data are read and fitted Ctrl+C interrupts the command, as `fit`'s does (exit 130, which the
    command line says in a line); it ended with 0, as if the triage had been done."""
    import threading

    from tests.tui.conftest import ANA
    from tui.app import TriageApp
    from tui.factory import open_session, sample_source
    go = threading.Event()

    def slow(progress):
        go.wait(10)
        return open_session(sample_source(), ledger_path, ANA, None, progress)

    app = TriageApp(slow)
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        assert app.session is None
        await pilot.press("ctrl+c")
        await pilot.pause()
        assert not app.is_running
    go.set()
    assert app.return_code == 130 and not ledger_path.exists()


async def test_another_analysts_decision_elsewhere_leaves_the_cursor_on_its_series(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(160, 50)) as pilot:
        session = await started(app, pilot)
        await pilot.press("down", "down", "down")
        mine = session.current
        s = int(session.view[0])
        before = len(session.view)
        bo = fledger.Identity("bo", "bo", "other-host")
        fledger.append(ledger_path, [fledger.Entry(series=session.results.data.key_of(s), action="hold",
                                                    fingerprint=session.results.data.fingerprints[s],
                                                    results=session.results_digest, proposed="poly0")], bo)
        await until(pilot, lambda: session.status[s] == "held")  # the screen looks every 2 s
        await pilot.pause()
        assert len(session.view) == before - 1 and session.current == mine and session.shown.series == mine
        assert f"{before - 1} listed" in screen_text(app)


async def test_tab_switches_to_the_evidence_when_narrow(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        session = await started(app, pilot)
        await pilot.press("down", "tab")
        await until(pilot, lambda: app.screen.evidence.series == session.current)
        await pilot.pause()
        text = screen_text(app)
        assert session.label(session.current) in text and "Proposed" in text
        await pilot.press("tab")
        await pilot.pause()
        assert "series" in screen_text(app).splitlines()[2]


@pytest.mark.parametrize("size", SIZES)
async def test_keys_typed_ahead_act_on_the_row_the_cursor_reached(ledger_path, size):
    """Moves and a decision key in one burst: the decision acts on the row the moves reached."""
    app = make_app(ledger_path)
    async with app.run_test(size=size) as pilot:
        session = await started(app, pilot)
        fourth = int(session.view[3])
        app.screen.series_list.action_cursor(1)
        app.screen.series_list.action_cursor(1)
        app.screen.series_list.action_cursor(1)
        app.screen.action_hold()  # before any message from the list has been handled
        await pilot.pause()
        await pilot.press("enter")
        await pilot.pause()
        [record] = records(ledger_path)
        assert record["series"] == session.results.data.key_of(fourth) and record["action"] == "hold"


async def test_in_the_all_series_view_an_accept_moves_to_the_next_row(ledger_path):
    # A trial accepted row 20 of "all series" and was sent back to the top (the next series needing
    # attention, wrapping round); outside the attention view the next row is what a user expects.
    app = make_app(ledger_path)
    async with app.run_test(size=(120, 40)) as pilot:
        session = await started(app, pilot)
        session.set_filter("all")
        row = next(i for i in range(10, len(session.view))
                   if session.severity(int(session.view[i])) is None and session.results.chosen[session.view[i]] >= 0)
        session.cursor = row
        app.screen.refresh_all()
        await pilot.pause()
        following = int(session.view[row + 1])
        await pilot.press("a")
        await until(pilot, lambda: session.current == following)
        assert session.filter == "all" and session.cursor in (row, row + 1)


async def test_the_revoke_dialog_says_when_what_stands_again_was_made_on_other_data(ledger_path):
    """A trial: 'bo accepted poly2 at 13:53:07 UTC stands again' — an accept on last cycle's data, so the series
    reads stale after the revoke, which the dialog did not say."""
    app = make_app(ledger_path)
    async with app.run_test(size=(100, 30), notifications=True) as pilot:
        session = await started(app, pilot)
        s = session.current
        key = session.results.data.key_of(s)
        fledger.append(ledger_path, [fledger.Entry(series=key, action="accept", fingerprint="0" * 64,
                                                   results="ab" * 32, model="poly1", proposed="poly1")],
                       fledger.Identity("bo", "bo", "host"))  # last cycle's decision, by another analyst
        await until(pilot, lambda: session.status[s] == "stale")  # the screen shows it (decisions bind to that)
        session.bring(s)
        await pilot.press("h", "enter")  # held on these data
        await pilot.pause()
        assert session.status[s] == "held"
        await pilot.press("u")
        await pilot.pause()
        said = " ".join(screen_text(app).split())
        assert "stands again, made on other data than these: the" in said and "series reads stale," in said, said
        await pilot.press("escape")
