"""Keys typed ahead of the screen, as a fast typist's terminal sends them (queued at once; Pilot's ``press``
waits for the screen between keys, so it never shows these).

- ↓ Enter in the override dialog: the dialog's own Enter ran before the list had taken the ↓, found the proposal
  highlighted, refused it and dropped the Enter (the analyst saw nothing happen).
- Choosing a model closes the dialog, and the reason box opens when the screen runs the dialog's answer, which
  Textual posts after the close: a key typed in between reached the list — an ``a`` (a reason begun "as good
  as…") accepted the series under the cursor at once.  Now the screen takes no key of its own while an answer is
  on its way.
"""
from __future__ import annotations

import json

from textual import events

from tui.screens.dialogs import TextDialog
from tui.screens.override import OverrideDialog

from .conftest import all_listed, make_app, until


def type_ahead(app, *keys: str) -> None:
    for key in keys:
        event = events.Key(key, key if len(key) == 1 else "\r" if key == "enter" else None)
        event.set_sender(app)
        app._driver.send_message(event)


async def on_an_unflagged_series(app, pilot) -> int:
    """The cursor on a series without flags that has a model to override with (``a`` records it at once), below
    its proposal in the override dialog: ↓ reaches it (the list stops at its last row)."""
    session = await all_listed(app, pilot)
    results = session.results
    s = next(int(i) for i in session.view
             if not session.diagnosis.raised[int(i)].any() and results.available[int(i)].sum() >= 2
             and results.available[int(i), int(results.chosen[int(i)]) + 1:].any())
    session.cursor = int((session.view == s).nonzero()[0][0])
    app.screen.refresh_all()
    await pilot.pause()
    return s


def records(path) -> list[dict]:
    return [json.loads(line) for line in path.read_text().splitlines()] if path.exists() else []


async def test_down_and_enter_typed_together_choose_the_next_model(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(120, 34)) as pilot:
        await on_an_unflagged_series(app, pilot)
        await pilot.press("o")
        await until(pilot, lambda: isinstance(app.screen, OverrideDialog))
        dialog = app.screen
        type_ahead(app, "down", "enter")
        await until(pilot, lambda: isinstance(app.screen, TextDialog))
        assert app.screen.query_one("Input").placeholder == "a note is required"
        # its scroll fix-ups, queued after a refresh, may run once it has closed (typed fast: NoMatches ended the app)
        dialog._whole_rows()
        dialog._from_a_whole_row()


async def test_no_key_of_the_screen_acts_while_a_dialogs_answer_is_on_its_way(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(120, 34)) as pilot:
        await on_an_unflagged_series(app, pilot)
        triage = app.screen
        assert triage.check_action("accept", ())
        await pilot.press("o", "down")
        dialog = app.screen
        assert isinstance(dialog, OverrideDialog)
        model = dialog.rows[dialog.query_one("OptionList").highlighted].name
        dialog.dismiss(model)  # as the list's Enter does: the answer is posted, the dialog popped
        assert app.screen is triage and not triage.check_action("accept", ())  # a typed-ahead 'a' does nothing
        await until(pilot, lambda: isinstance(app.screen, TextDialog))
        await pilot.press(*"flat", "enter")
        await until(pilot, lambda: len(records(ledger_path)) == 1)
        assert [(r["action"], r["model"]) for r in records(ledger_path)] == [("override", model)]
        assert app.screen is triage and triage.check_action("accept", ()) is not None  # keys act again


async def test_a_second_enter_typed_ahead_does_not_close_the_screen_beneath(ledger_path):
    """↓ Enter, a reason begun and Enter, typed at once: the keys after the first Enter reached the closed
    dialog's list (Textual forwards a key to the focus of the moment), its second Enter answered it again, and
    Textual's ``dismiss`` popped the screen on top — the triage screen: a blank terminal where not even ``q``
    acted.  Now a dialog answers once; the triage screen stays, and the reason box opens over it."""
    from tui.screens.triage import TriageScreen
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        await on_an_unflagged_series(app, pilot)
        triage = app.screen
        await pilot.press("o")
        await until(pilot, lambda: isinstance(app.screen, OverrideDialog))
        type_ahead(app, "down", "enter", "a", "s", "space", "g", "o", "enter")
        await until(pilot, lambda: isinstance(app.screen, TextDialog))
        await pilot.pause(0.3)
        assert [type(s) for s in app.screen_stack][-2:] == [TriageScreen, TextDialog]
        await pilot.press("escape")
        await until(pilot, lambda: app.screen is triage)
        assert records(ledger_path) == []  # nothing recorded by keys typed ahead


async def test_a_reason_typed_with_the_key_that_opens_its_box_is_not_recorded_lost(ledger_path):
    """'h', a reason and Enter in one burst: the letters reached the list before the box's field had the focus
    and were dropped, the Enter came after — a hold recorded with an empty reason (optional: nothing refused
    it).  Now the box's first Enter says keys were lost and records nothing; the analyst looks, types, Enter."""
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        await on_an_unflagged_series(app, pilot)
        type_ahead(app, "h", *"waiting", "space", *"on", "space", *"supplier", "enter")
        await until(pilot, lambda: isinstance(app.screen, TextDialog))
        await pilot.pause(0.5)
        box = app.screen.query_one("Input")
        if box.value != "waiting on supplier":  # keys lost: said, nothing recorded
            assert records(ledger_path) == []
            assert "Keys typed before this box opened were lost" in str(app.screen.query_one("#dialog-hint").render())
            box.value = "waiting on supplier"
            await pilot.press("enter")
        await until(pilot, lambda: len(records(ledger_path)) == 1)
        [record] = records(ledger_path)
        assert (record["action"], record["note"]) == ("hold", "waiting on supplier")


async def test_a_decision_key_typed_twice_decides_nothing_on_the_next_series(ledger_path, monkeypatch):
    """'a a' on a series without flags: the first accepts it and the list moves on; the second came 4 ms later and
    accepted the next series, whose evidence was never drawn.  Now a decision key that soon after its series came
    up is not done, and the screen says so; pressed again once the series has been up a while, it acts."""
    import tui.screens.triage
    monkeypatch.setattr(tui.screens.triage, "SETTLE_SECONDS", 0.4)
    app = make_app(ledger_path)
    async with app.run_test(size=(120, 34), notifications=True) as pilot:
        first = await on_an_unflagged_series(app, pilot)
        await pilot.pause(0.5)  # the series has been on screen a while
        type_ahead(app, "a", "a")
        await until(pilot, lambda: len(records(ledger_path)) >= 1)
        await pilot.pause(0.2)
        assert [r["series"] for r in records(ledger_path)] == [app.session.keys.key_of(first)]
        said = next(n.message for n in app._notifications if n.message.startswith("Not done: accept on "))
        assert "came up less than 1.5 s after your last decision (a key typed twice, or a note begun" in said
        nxt = app.session.shown
        await pilot.pause(1.6)  # the next series has been on screen longer than a decision's settling time
        await pilot.press("a")
        await until(pilot, lambda: len(records(ledger_path)) == 2)
        assert records(ledger_path)[-1]["series"] == nxt.key


async def test_a_reason_lost_to_a_closing_dialog_is_said_in_the_box(ledger_path):
    """'o ↓' then 'Enter' and the reason in one burst: the reason's letters reached the closed dialog, taken by
    nothing, before the reason box opened; its first Enter said only "A note is required here."."""
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        await on_an_unflagged_series(app, pilot)
        await pilot.press("o")
        await until(pilot, lambda: isinstance(app.screen, OverrideDialog))
        await pilot.press("down")
        type_ahead(app, "enter", *"as", "space", *"good", "enter")
        await until(pilot, lambda: isinstance(app.screen, TextDialog))
        await pilot.pause(0.3)
        box = app.screen
        if box.query_one("Input").value != "as good":  # lost: the first Enter says so and records nothing
            await pilot.press("enter")
            assert "Keys typed before this box opened were lost" in str(box.query_one("#dialog-hint").render())
        assert records(ledger_path) == []


async def test_o_down_enter_typed_in_one_burst_shows_the_picked_models_numbers_in_the_note_box(ledger_path):
    """A trial typed ``o ↓ Enter`` at once: a model was picked from a list never drawn, and the note box asked only
    "Why poly5 instead of poly4 …?".  The box now says what the override signs — the picked model at the plan price,
    its own flags — and the caution every sign-off carries, so nothing is signed unseen."""
    from fitcore.review.formats import fmt
    app = make_app(ledger_path)
    async with app.run_test(size=(120, 34)) as pilot:
        s = await on_an_unflagged_series(app, pilot)
        type_ahead(app, "o", "down", "enter")
        await until(pilot, lambda: isinstance(app.screen, TextDialog) and app.screen.query("#dialog-about"))
        title = app.screen.title_text
        model = title.split()[1]  # "Why MODEL instead of …"
        results = app.session.results
        c = results.names.index(model)
        about = str(app.screen.query_one("#dialog-about").render())
        assert "At the plan price" in about and fmt(results.plan_volume[s, c]) in about
        assert f"{model}: no shape or range flag" in about or f"{model}'s own flags: " in about
        assert "pricefold proposes; you decide" in about


async def test_a_note_typed_after_an_accept_that_asked_none_decides_nothing(ledger_path, monkeypatch):
    """A trial pressed ``a`` on a series without flags (accepted at once, no box) and typed the note it meant to
    give: the words reached the list as keys, and their ``u`` withdrew that accept (note '').  Now a decision key
    typed amid keys that did nothing is not done (``TriageScreen.typing``), a ``u`` right after the accept is too
    soon, and a revoke asks first: the sentence, Enter included, withdraws or signs nothing."""
    import asyncio

    import tui.screens.triage
    monkeypatch.setattr(tui.screens.triage, "SETTLE_SECONDS", 0.4)
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24), notifications=True) as pilot:
        first = await on_an_unflagged_series(app, pilot)
        await pilot.pause(0.5)
        type_ahead(app, "a")
        await until(pilot, lambda: len(records(ledger_path)) == 1)
        for key in [*"under review, also hold", "space", *"a", "space", *"note of how it was", "enter"]:
            type_ahead(app, key)  # a typist: about 12 keys a second, each acted on before the next
            await asyncio.sleep(0.08)
            await pilot.pause()
        await pilot.pause(0.3)
        [record] = records(ledger_path)
        assert record["action"] == "accept" and record["series"] == app.session.keys.key_of(first)
        assert not isinstance(app.screen, TextDialog)  # no revoke box left holding the words either
        said = [n.message for n in app._notifications if n.message.startswith("Not done: ")]
        assert any("typing a note? no box is open" in message for message in said)


async def test_a_sentence_begun_a_moment_after_an_instant_accept_does_not_sign_the_next_series(ledger_path,
                                                                                                 monkeypatch):
    """``a`` on a series that needs no note signs at once and moves on; the analyst, expecting a note box, types
    "all good" 0.6 s later: its ``a`` signed the next series, unseen (a trial).  A decision key within
    ``AFTER_DECISION_SECONDS`` of a decision moving the cursor on is not done, and the screen says why."""
    import asyncio

    import tui.screens.triage
    monkeypatch.setattr(tui.screens.triage, "SETTLE_SECONDS", 0.4)
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24), notifications=True) as pilot:
        first = await on_an_unflagged_series(app, pilot)
        await pilot.pause(0.5)
        await pilot.press("a")
        await until(pilot, lambda: len(records(ledger_path)) == 1)
        await asyncio.sleep(0.6)
        for key in [*"all", "space", *"good"]:
            type_ahead(app, key)
            await asyncio.sleep(0.15)
            await pilot.pause()
        await pilot.pause(0.3)
        assert [r["series"] for r in records(ledger_path)] == [app.session.keys.key_of(first)]
        said = [n.message for n in app._notifications if n.message.startswith("Not done: accept on ")]
        assert any("after your last decision (a key typed twice, or a note begun where none was asked?)" in message
                   for message in said), said


async def test_a_note_begun_with_q_after_an_instant_accept_does_not_leave_the_screen(ledger_path, monkeypatch):
    """"quite good" typed 0.6 s after an accept that asked for no note: its ``q`` left the screen and the rest,
    "ite good", ran in the shell as a command (a trial).  Now the ``q`` is not done; a later one leaves."""
    import asyncio

    import tui.screens.triage
    monkeypatch.setattr(tui.screens.triage, "SETTLE_SECONDS", 0.4)
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24), notifications=True) as pilot:
        await on_an_unflagged_series(app, pilot)
        await pilot.pause(0.5)
        await pilot.press("a")
        await until(pilot, lambda: len(records(ledger_path)) == 1)
        await asyncio.sleep(0.6)
        for key in "quite":
            type_ahead(app, key)
            await asyncio.sleep(0.15)
            await pilot.pause()
        await pilot.pause(0.3)
        assert app.is_running and app.return_code is None
        assert any(n.message.startswith("Not done: quit") for n in app._notifications)
        await asyncio.sleep(1.6)
        await pilot.press("q")
        await until(pilot, lambda: app.return_code is not None)
