"""Every key of the triage screen, at 80×24 and 160×50, checked on the ledger and on screen."""
from __future__ import annotations

import json

import pytest

from fitcore import ledger as fledger
from fitcore.review.flags import CODES
from tests.tui.conftest import make_app, past_stop_flags, screen_text, started, until

SIZES = [(80, 24), (160, 50)]


def records(path):
    return [json.loads(line) for line in path.read_text().splitlines()] if path.exists() else []


@pytest.mark.parametrize("size", SIZES)
async def test_first_screen_lists_the_series_needing_attention(ledger_path, size):
    app = make_app(ledger_path)
    async with app.run_test(size=size) as pilot:
        session = await started(app, pilot)
        text = screen_text(app)
        attention = int(session.needs_attention().sum())
        assert f"{attention} listed (needs attention, pending; by attention)" in text
        first = session.label(session.view[0])
        assert first in text and session.flag_codes(session.view[0])[0] in text
        assert "a accept" in text and "q quit" in text
        assert "u withdraw" not in text  # nothing of ana's to withdraw yet: the key is hidden
        if size == (160, 50):
            assert "CV MSE" in text and "(chosen)" in text  # evidence beside the list
        else:
            assert "CV MSE" not in text  # narrow: the list alone until Tab


@pytest.mark.parametrize("size", SIZES)
async def test_accept_records_and_moves_on(ledger_path, size):
    app = make_app(ledger_path)
    async with app.run_test(size=size) as pilot:
        session = await started(app, pilot)
        await past_stop_flags(app, pilot)  # accepting past a stop flag needs a note: the ledger refuses it
        first, second = int(session.view[session.cursor]), int(session.view[session.cursor + 1])
        listed = len(session.view)
        await pilot.press("a")
        await pilot.pause()
        [record] = records(ledger_path)
        assert record["action"] == "accept" and record["analyst"] == "ana"
        assert record["series"] == session.results.data.key_of(first)
        assert record["model"] == record["proposed"] == session.results.names[session.results.chosen[first]]
        assert record["fingerprint"] == session.results.data.fingerprints[first]
        assert len(session.view) == listed - 1 and session.current == second
        assert f"{listed - 1} listed" in screen_text(app)


async def test_override_needs_a_note_and_records_the_other_candidate(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(160, 50)) as pilot:
        session = await started(app, pilot)
        s = session.current
        await pilot.press("o")
        await pilot.pause()
        assert "Override: choose the candidate to use" in screen_text(app)
        await pilot.press("down", "enter")
        await pilot.pause()
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
async def test_note_hold_and_withdraw(ledger_path, size):
    app = make_app(ledger_path)
    async with app.run_test(size=size) as pilot:
        session = await started(app, pilot)
        s = session.current
        await pilot.press("n", *"call the buyer", "enter")
        await pilot.pause()
        assert [r["action"] for r in records(ledger_path)] == ["note"] and session.status[s] == "pending"
        assert session.current == s  # a note does not move on
        await pilot.press("f")
        await pilot.pause()
        await pilot.press("down", "enter")  # filter: all series, so decided ones stay listed
        await pilot.pause()
        assert session.filter == "all"
        await pilot.press("h")
        await pilot.pause()
        assert session.status[s] == "held"
        session.cursor = int((session.view == s).nonzero()[0][0])
        app.screen.refresh_all()
        await pilot.pause()
        assert "u withdraw" in screen_text(app)
        await pilot.press("u")
        await pilot.pause()
        assert [r["action"] for r in records(ledger_path)] == ["note", "hold", "revoke"]
        assert session.status[s] == "pending"
        assert fledger.verify(ledger_path) == []


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


async def test_search_filter_and_sort(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(160, 50)) as pilot:
        session = await started(app, pilot)
        await pilot.press("slash", *"lemons", "enter")
        await pilot.pause()
        assert session.label(session.current) == "lemons 500 g · East"
        await pilot.press("f")
        await pilot.pause()
        assert "flag rising" in screen_text(app)
        for _ in range(4 + CODES.index("rising")):
            await pilot.press("down")
        await pilot.press("enter")
        await pilot.pause()
        assert session.flag_filter == "rising" and len(session.view) == int(session.diagnosis.flagged("rising").sum())
        assert all("rising" in session.flag_codes(s) for s in session.view)
        await pilot.press("f", "home", "down", "enter", "s", "home", "down", "enter")  # all series, by key
        await pilot.pause()
        labels = [session.label(s) for s in session.view]
        assert len(labels) == 180 and labels == sorted(labels)
        assert "180 listed (all series; by key)" in screen_text(app)


async def test_help_shows_keys_flags_and_cautions(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(160, 50)) as pilot:
        await started(app, pilot)
        await pilot.press("question_mark")
        await pilot.pause()
        text = screen_text(app)
        assert "withdraw your own latest decision" in text and "influential-point" in text
        await pilot.press("end")
        await pilot.pause()
        assert "extrapolation" in screen_text(app) and "you decide" in screen_text(app)
        await pilot.press("escape")
        await pilot.pause()
        assert "Keys" not in screen_text(app)


async def test_quit_leaves_the_decisions_in_the_ledger(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        await started(app, pilot)
        await past_stop_flags(app, pilot)
        await pilot.press("a", "q")
        await pilot.pause()
    assert app.return_code in (0, None) and len(records(ledger_path)) == 1


async def test_another_analysts_decision_shows_up(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(160, 50)) as pilot:
        session = await started(app, pilot)
        s = int(session.view[0])
        before = len(session.view)
        bo = fledger.Identity("bo", "bo", "other-host")
        fledger.append(ledger_path, [fledger.Entry(series=session.results.data.key_of(s), action="accept",
                                                    fingerprint=session.results.data.fingerprints[s],
                                                    results=session.results_digest, model="poly0", proposed="poly0")], bo)
        await until(pilot, lambda: session.status[s] == "accepted")  # the screen looks every 2 s
        await pilot.pause()
        assert len(session.view) == before - 1
        assert f"{before - 1} listed" in screen_text(app)


async def test_tab_switches_to_the_evidence_when_narrow(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        session = await started(app, pilot)
        await pilot.press("down", "tab")
        await until(pilot, lambda: app.screen.evidence.series == session.current)  # follows once the cursor rests
        await pilot.pause()
        text = screen_text(app)
        assert session.label(session.current) in text and "observed" in text
        await pilot.press("tab")
        await pilot.pause()
        assert "series" in screen_text(app).splitlines()[1]
