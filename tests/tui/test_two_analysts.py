"""Two analysts on one results file and one ledger, each with a triage screen of their own."""
from __future__ import annotations

import json

import pytest

from fitcore.ledger import Identity
from tests.tui.conftest import box_words, make_app, screen_text, started, until

BO = Identity("bo", "bo", "other-host")


def records(path):
    return [json.loads(line) for line in path.read_text().splitlines()] if path.exists() else []


async def both_on(ana, pa, bo, pb, label: str) -> tuple[object, int]:
    """Both screens started with the cursor on the series ``label``: bo's session and the series."""
    await started(ana, pa)
    session = await started(bo, pb)
    s = put_cursor_on(bo, label)
    put_cursor_on(ana, label)
    await pa.pause()
    return session, s


def put_cursor_on(app, label: str) -> int:
    session = app.session
    position = next(i for i, s in enumerate(session.view) if session.label(int(s)) == label)
    session.cursor = position
    app.screen.refresh_all()
    return int(session.view[position])


async def test_a_decision_lands_on_the_series_on_screen_after_the_other_decided_it(ledger_path):
    """Issue case 1: both on 'table salt 1 kg · North'; ana accepts; bo's list reloads; bo presses a."""
    ana, bo = make_app(ledger_path), make_app(ledger_path, who=BO)
    async with ana.run_test(size=(80, 24)) as pa, bo.run_test(size=(80, 24)) as pb:
        await started(ana, pa)
        await started(bo, pb)
        salt = "table salt 1 kg · North"
        put_cursor_on(ana, salt)
        s = put_cursor_on(bo, salt)
        await pa.pause()
        await pb.pause()
        await pa.press("a")
        await pa.pause()
        await pa.press(*"checked", "enter")  # stop flags: a note comes first
        await pa.pause()
        assert [r["analyst"] for r in records(ledger_path)] == ["ana"]
        await until(pb, lambda: bo.session.status[s] == "accepted")  # bo's screen looks every 2 s
        await pb.pause()
        await pb.press("a")  # 2.2 s after ana's accept
        await pb.pause()
        assert type(bo.screen).__name__ == "TriageScreen"  # no note dialog: the key waits for bo to move
        written = records(ledger_path)
        assert all(r["series"] == {"product": "table salt 1 kg", "region": "North"} for r in written), written
        assert bo.session.current == s  # still on the series bo was looking at
        assert "left list: ana accept" in screen_text(bo)


async def test_a_screen_opened_on_decisions_already_made_reports_no_news(ledger_path, tmp_path):
    """Decisions recorded before a screen opens are history, not news: nothing says 'just now' (a trial
    saw the top row blamed on whoever had decided the file's first series)."""
    first = make_app(ledger_path, who=BO)
    async with first.run_test(size=(80, 24)) as pilot:
        session = await started(first, pilot)
        # the file's first series (the one the opening read meets first), whatever list it is in
        session.decide(session.look(0), "hold", note="asked the buyer")
    assert len(records(ledger_path)) == 1
    late = make_app(ledger_path)
    async with late.run_test(size=(80, 24)) as pilot:
        session = await started(late, pilot)
        assert session.news is None and "just now" not in screen_text(late) and "← bo" not in screen_text(late)
        await pilot.press("down")
        await pilot.pause()
        assert session.news is None


async def test_while_the_series_waits_no_decision_key_acts_and_moving_lets_it_go(ledger_path):
    ana, bo = make_app(ledger_path), make_app(ledger_path, who=BO)
    async with ana.run_test(size=(80, 24)) as pa, bo.run_test(size=(80, 24)) as pb:
        session, s = await both_on(ana, pa, bo, pb, "lemons 500 g · East")
        await pa.press("h", "enter")
        await until(pb, lambda: "left list: ana held" in screen_text(bo))
        assert session.waiting and session.current == s and session.status[s] == "held"
        footer = lambda: screen_text(bo).splitlines()[-1]  # noqa: E731
        await until(pb, lambda: "q quit" in footer() and "a accept" not in footer())  # no decision offered
        assert "h hold" not in footer() and "o override" not in footer()
        await pb.press("a", "h", "n", "o")
        await pb.pause()
        assert [r["analyst"] for r in records(ledger_path)] == ["ana"]
        listed = len(session.view)
        await pb.press("down")
        await pb.pause()
        assert not session.waiting and s not in session.view and len(session.view) == listed - 1
        await until(pb, lambda: "a accept" in footer())


def test_a_decision_on_a_series_changed_since_it_was_shown_is_refused(ledger_path):
    """Case 1 when bo presses before his screen has looked again: the ledger changed on what he saw."""
    from fitcore.ledger import LedgerConflict, LedgerError
    from tui.factory import open_session, sample_source
    ana = open_session(sample_source(), ledger_path, Identity("ana", "ana", "h"))
    bo = open_session(sample_source(), ledger_path, BO)
    s = next(int(i) for i in bo.view if int(i) != bo.current)  # not the one his screen is on: that one waits
    seen = bo.look(s)
    written = ana.decide(ana.look(s), "accept", note="checked")
    proposal = bo.results.names[int(bo.results.chosen[s])]
    with pytest.raises(LedgerConflict, match=rf"^ana accepted {proposal} at {written['at'][11:19]} UTC; look again$"):
        bo.decide(seen, "accept", note="fine")
    assert len(records(ledger_path)) == 1
    again = bo.look(s)  # once shown again, a hold is bo's to make; another accept is refused
    with pytest.raises(LedgerError, match="already accepted on this data"):
        bo.decide(again, "accept", note="fine")
    assert bo.decide(again, "hold")["analyst"] == "bo"


def test_simultaneous_decisions_the_second_is_refused_under_the_lock(ledger_path):
    """Issue case 2: a hold and an accept 20 ms apart, both screens having seen the same state."""
    from fitcore.ledger import LedgerConflict
    from tui.factory import open_session, sample_source
    ana = open_session(sample_source(), ledger_path, Identity("ana", "ana", "h"))
    bo = open_session(sample_source(), ledger_path, BO)
    s = int(ana.view[0])
    ana_seen, bo_seen = ana.look(s), bo.look(s)
    bo.reload_ledger = lambda *args, **kwargs: set()  # bo's screen has not looked since; ana appends first
    ana.decide(ana_seen, "hold")
    with pytest.raises(LedgerConflict, match="^ana held at .* UTC; look again$"):
        bo.decide(bo_seen, "accept", note="fine")
    assert [r["action"] for r in records(ledger_path)] == ["hold"]
    assert bo.status[s] == "held"  # the refusal brought bo's screen the hold


async def test_a_hold_typed_while_the_other_held_is_refused_naming_who_and_when(ledger_path):
    """As a tmux trial did it: both hold the same series; bo's note dialog was open when ana's hold landed and
    his screen had looked since.  The refusal names ana's hold and its time (the ledger's own sentence), nothing
    is appended, and bo's cursor stays on the series."""
    ana, bo = make_app(ledger_path), make_app(ledger_path, who=BO)
    async with ana.run_test(size=(120, 40)) as pa, bo.run_test(size=(120, 40)) as pb:
        session, s = await both_on(ana, pa, bo, pb, "lemons 500 g · East")
        await pb.pause()
        await pb.press("h")  # bo's note dialog is open
        await pa.press("h", "enter")
        [held] = records(ledger_path)
        await until(pb, lambda: session.status[s] == "held")  # bo's screen has looked again
        await pb.press("enter")
        await pb.pause()
        assert records(ledger_path) == [held]
        assert f"Not recorded: ana held at {held['at'][11:19]} UTC; look again" in screen_text(bo)
        assert session.current == s


async def test_undo_never_withdraws_a_decision_another_analyst_made_since(ledger_path):
    """On one OS account the ledger takes a revoke as the account's: 'u' after bo replaced ana's hold
    withdrew bo's accept while telling ana her hold was revoked (a trial found it)."""
    shared = Identity("bo", "ana", "test-host")  # another display name, the same OS user as ANA
    from fitcore import ledger
    ana = make_app(ledger_path)
    async with ana.run_test(size=(80, 24)) as pa:
        mine = await started(ana, pa)
        s = int(mine.view[0])
        held = mine.decide(mine.look(s), "hold", note="asking the buyer")
        assert mine.undo_target()[0] == s
        ledger.append(ledger_path, [ledger.Entry(series=held["series"], action="hold", fingerprint=held["fingerprint"],
                                                 results=held["results"], note="bo holds it too, for pricing",
                                                 supersedes=held["digest"])], shared)
        mine.reload_ledger()
        assert mine.undo_target() is None
        await pa.press("u")
        await pa.pause()
        assert [r["action"] for r in records(ledger_path)] == ["hold", "hold"]


async def test_a_note_the_ledger_refused_fills_the_next_note_box_on_that_series(ledger_path):
    """bo typed a reason into his hold while ana's note on the series landed: the refusal kept bo's words, and
    his next note box on the series starts with them (a trial had to type a refused note again)."""
    from tui.screens.dialogs import TextDialog
    ana, bo = make_app(ledger_path), make_app(ledger_path, who=BO)
    async with ana.run_test(size=(120, 40)) as pa, bo.run_test(size=(120, 40)) as pb:
        session, s = await both_on(ana, pa, bo, pb, "lemons 500 g · East")
        await pb.pause()
        await pb.press("h", *"buyer says the plan moves")  # bo's note dialog is open, typed in
        await pa.press("n", *"asked", "enter")
        await until(pb, lambda: len(session.history(s)) == 1)  # bo's screen has looked again
        await pb.press("enter")
        await pb.pause()
        assert "Not recorded" in screen_text(bo) and "Your note is kept" in screen_text(bo)
        await pb.press("escape")  # the refusal closed
        await pb.pause()
        await pb.press("h")
        await pb.pause()
        assert isinstance(bo.screen, TextDialog) and bo.screen.query_one("#dialog-input").value == \
            "buyer says the plan moves"
        await pb.press("enter")
        await pb.pause()
        assert [(r["analyst"], r["action"], r.get("note")) for r in records(ledger_path)] == \
            [("ana", "note", "asked"), ("bo", "hold", "buyer says the plan moves")]


@pytest.mark.parametrize("size", [(80, 24), (60, 20)])
async def test_every_decision_box_on_a_series_another_analyst_decided_says_what_stands(ledger_path, size):
    """A trial: ana's accept box on a series bo had held ('Accept poly0 for table salt 1 kg · South despite …') did
    not say it replaced bo's hold; the evidence saying so was behind the box.  Now the accept's, the override's and
    the hold's boxes say what they replace (who, what, when), and a note's that it leaves that standing — with the
    keys' line in view, at 80×24 and at 60×20; the message after the decision says it too."""
    from tui.factory import open_session, sample_source
    from tui.screens.dialogs import TextDialog
    from tui.screens.override import OverrideDialog
    from .conftest import on_series
    app = make_app(ledger_path)
    async with app.run_test(size=size, notifications=True) as pilot:
        salt = {"product": "table salt 1 kg", "region": "South"}
        s = await on_series(app, pilot, salt)
        session = app.session
        bo = open_session(sample_source(), ledger_path, BO)  # bo's screen, while ana's is open
        held = bo.decide(bo.look(s), "hold", note="asked the buyer")
        app.screen.poll_ledger()  # ana's screen looks, as every 2 s
        await until(pilot, lambda: session.status[s] == "held")
        said = f"bo held at {held['at'][11:19]} UTC on {held['at'][:10]}"

        async def box(*keys: str) -> str:
            await pilot.press(*keys)
            await until(pilot, lambda: isinstance(app.screen, TextDialog))
            await pilot.pause()
            words = box_words(app)
            assert "Enter to confirm · Esc to cancel" in words, words  # the keys' line is not pushed off
            return words
        assert f"This replaces what stands: {said}." in await box("a"), said
        await pilot.press("escape")
        assert f"This replaces what stands: {said}." in await box("h")
        await pilot.press("escape")
        assert f"A note leaves what stands as it is: {said}." in await box("n")
        await pilot.press("escape")
        await pilot.press("o")
        await until(pilot, lambda: isinstance(app.screen, OverrideDialog))
        assert f"This replaces what stands: {said}." in await box("down", "enter")
        await pilot.press(*"seen", "enter")
        await until(pilot, lambda: len(records(ledger_path)) == 2)
        assert any(f"in place of {said}" in n.message for n in app._notifications)
        session.look(s)
        assert app.screen.replaced_text(session.shown) is None  # ana's own override now: nothing more to say


async def test_an_accept_needing_no_note_asks_first_on_a_series_another_analyst_decided(ledger_path):
    """A trial: bo's `a` on a series ana had just held, with no stop flag, opened no box and recorded at once —
    one key replacing a colleague's hold, told only afterwards.  Now it asks, naming what stands; No (the default)
    or Esc records nothing, Yes accepts.  On a series nobody else decided `a` still records at once."""
    from tui.factory import open_session, sample_source
    from tui.screens.dialogs import ChoiceDialog
    from .conftest import on_series
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        figs = {"product": "fresh figs 500 g", "region": "North"}  # warn flags only: no note asked
        s = await on_series(app, pilot, figs)
        session = app.session
        assert not session.needs_reason(session.shown, "accept")
        bo = open_session(sample_source(), ledger_path, BO)  # bo's screen, while ana's is open
        held = bo.decide(bo.look(s), "hold", note="asked the buyer")
        app.screen.poll_ledger()
        await until(pilot, lambda: session.status[s] == "held")
        for no in (("enter",), ("escape",)):
            await pilot.press("a")
            await until(pilot, lambda: isinstance(app.screen, ChoiceDialog))
            await pilot.pause()
            assert f"This replaces what stands: bo held at {held['at'][11:19]} UTC" in box_words(app)
            await pilot.press(*no)
            await until(pilot, lambda: not isinstance(app.screen, ChoiceDialog))
            assert len(records(ledger_path)) == 1 and session.status[s] == "held"
        await pilot.press("a")
        await until(pilot, lambda: isinstance(app.screen, ChoiceDialog))
        await pilot.press("up", "enter")
        await until(pilot, lambda: session.status[s] == "accepted")
        assert [(r["analyst"], r["action"]) for r in records(ledger_path)] == [("bo", "hold"), ("ana", "accept")]
