"""The ledger turning broken (or put back) under an open screen: nothing announced as new, the list as it was.

A trial edited one byte of an old note in place (size and modification time kept) under an open screen: the
screen turned read-only, rightly, but re-read the file from its start and told a revoke made before it opened as
just made (a notification, the row marked ``← bo``), and its count dropped by a look-alike it no longer knew.
"""
from __future__ import annotations

import json
import os

from fitcore import ledger
from fitcore.ledger import Identity
from tests.fitcore.ledger_support import edit_in_place
from tests.tui.conftest import make_app, screen_text, started, until

BO = Identity("bo", "bo", "other-host")


def bo_decided(ledger_path):
    """bo's hold then revoke on the first listed series, his hold noted 'ask category' on the second, and a hold
    on a series spelled otherwise than one of the results (a look-alike, marked ≈): bo's session and the series
    of his note."""
    from tui.factory import open_session, sample_source
    bo = open_session(sample_source(), ledger_path, BO)
    first, second, alike = (int(s) for s in bo.view[[0, 1, -1]])
    held = bo.decide(bo.look(second), "hold", note="ask category")
    bo.decide(bo.look(first), "hold", note="check promo")
    bo.decide(bo.look(first), "revoke")
    key = {name: value.upper() for name, value in bo.results.data.key_of(alike).items()}
    ledger.append(ledger_path, [ledger.Entry(series=key, action="hold", fingerprint=held["fingerprint"],
                                             results=held["results"], note="old spelling")], BO)
    return bo, second


def what_is_listed(session) -> tuple:
    return (session.counts(), session.view.tolist(), session.status.tolist(), session.spellings.marked.tolist(),
            {sid: len(history.records) for sid, history in session.histories.items()})


async def test_an_edit_in_place_under_the_screen_announces_nothing_and_keeps_the_list(ledger_path):
    _, noted = bo_decided(ledger_path)
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24), notifications=True) as pilot:
        session = await started(app, pilot)
        before = what_is_listed(session)
        assert session.spellings.marked.any() and "≈" in screen_text(app)
        assert session.history(session.current)[-1]["action"] == "revoke"  # bo's, made before the screen opened
        edit_in_place(ledger_path, 1, b'"note":"ask', b'"note":"aAk', keep_mtime=True)
        await until(pilot, lambda: "READ-ONLY: the ledger is broken (line 1" in screen_text(app))
        await pilot.pause()
        text = screen_text(app)
        assert session.news is None and "withdrew" not in text and "← bo" not in text
        assert what_is_listed(session) == before  # counts, rows, statuses, look-alikes: the last intact state
        assert "≈" in text and f"{len(session.view)} listed" in text
        assert session.history(noted)[-1]["note"] == "ask category"  # what it showed, not the edit


async def test_a_forged_record_appended_under_the_screen_is_not_news(ledger_path):
    """A whole line appended that the chain refuses (bo's revoke copied as an accept) breaks the ledger
    without a re-read: the record is not applied, and the screen says read-only at once."""
    bo_decided(ledger_path)
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24), notifications=True) as pilot:
        session = await started(app, pilot)
        before = what_is_listed(session)
        lines = ledger_path.read_bytes().splitlines(keepends=True)
        revoke = lines[2].replace(b'"action":"revoke"', b'"action":"accept"', 1)
        with open(ledger_path, "ab") as handle:
            handle.write(revoke)
        app.screen.poll_ledger()
        await pilot.pause()
        text = screen_text(app)
        assert "READ-ONLY: the ledger is broken (line 5" in text
        assert session.news is None and "← bo" not in text and "bo accepted" not in text
        assert what_is_listed(session) == before


async def test_another_analysts_record_before_a_forged_one_is_news_and_the_forged_one_is_not(ledger_path):
    """Found in one look: bo's hold (verified: news) and, after it, a copy of an earlier line (refused by the chain):
    the hold is applied and said, the copy is not, and the screen turns read-only."""
    bo, _ = bo_decided(ledger_path)
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24), notifications=True) as pilot:
        session = await started(app, pilot)
        s, other = session.current, int(session.view[3])
        bo.reload_ledger()
        held = bo.decide(bo.look(s), "hold", note="pricing asks")
        forged = dict(held, series=session.keys.key_of(other), seq=held["seq"] + 1, prev=held["digest"])
        with open(ledger_path, "a") as handle:  # bo's hold copied onto another series: its digest no longer matches
            handle.write(json.dumps(forged, sort_keys=True, separators=(",", ":")) + "\n")
        app.screen.poll_ledger()
        await pilot.pause()
        text = " ".join(screen_text(app).split())
        assert session.news is not None and session.news["note"] == "pricing asks"
        assert "left list: bo held" in text and "READ-ONLY: the ledger is broken (line 6" in text
        assert session.status[s] == "held" and session.status[other] == "pending"
        assert len(session.history(other)) == 0


async def test_an_identical_copy_put_in_place_is_not_news_and_keeps_the_look_alikes(ledger_path):
    """The same records under a new inode (a copy moved into place): read again from the start, intact; nothing
    is new, and the series spelled like a ledger series stays marked."""
    bo_decided(ledger_path)
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24), notifications=True) as pilot:
        session = await started(app, pilot)
        before = what_is_listed(session)
        copy = ledger_path.with_name("copy.jsonl")
        copy.write_bytes(ledger_path.read_bytes())
        os.replace(copy, ledger_path)
        generation = session.book.generation
        app.screen.poll_ledger()
        await pilot.pause()
        assert session.book.generation == generation + 1 and session.writable
        text = screen_text(app)
        assert session.news is None and "withdrew" not in text and "← bo" not in text
        assert what_is_listed(session) == before and "≈" in text


async def test_the_title_counts_the_rows_listed_once_a_series_another_decided_is_let_go(ledger_path):
    """bo held the series under ana's cursor: it stays listed (``left list``) until she moves; then the title's
    count is the rows listed, as the attention count is (a trial read '294 listed' beside 'attention 293')."""
    from tui.factory import open_session, sample_source
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24), notifications=True) as pilot:
        session = await started(app, pilot)
        s, listed = session.current, len(session.view)
        bo = open_session(sample_source(), ledger_path, BO)
        bo.decide(bo.look(s), "hold", note="asking")
        app.screen.poll_ledger()
        await until(pilot, lambda: "left list: bo held" in screen_text(app))
        assert f"{listed:,} listed" in screen_text(app)  # the pinned row is still one of them
        await pilot.press("down")
        await pilot.pause()
        assert len(session.view) == listed - 1 == session.counts()["attention"]
        assert f"{listed - 1:,} listed" in screen_text(app).splitlines()[0]
        t = session.current  # again, left by ] (the next series needing attention)
        bo.reload_ledger()
        bo.decide(bo.look(t), "hold", note="asking too")
        app.screen.poll_ledger()
        await until(pilot, lambda: "left list: bo held" in screen_text(app))
        await pilot.press("right_square_bracket")
        await pilot.pause()
        assert session.current != t and len(session.view) == listed - 2 == session.counts()["attention"]
        assert f"{listed - 2:,} listed" in screen_text(app).splitlines()[0]


async def test_a_line_that_is_no_record_appended_turns_the_header_and_keys_read_only_at_once(ledger_path):
    """No record comes with it, so nothing redrew the list: the header and the key line must still say it."""
    bo_decided(ledger_path)
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        session = await started(app, pilot)
        assert "a accept" in screen_text(app).splitlines()[-1]
        with open(ledger_path, "a") as handle:
            handle.write("hello, not a record\n")
        app.screen.poll_ledger()
        await pilot.pause()
        text = screen_text(app)
        assert not session.writable and "READ-ONLY: the ledger is broken (line 5: not a valid JSON record" in text
        assert "a accept" not in text.splitlines()[-1] and "q quit" in text.splitlines()[-1]
