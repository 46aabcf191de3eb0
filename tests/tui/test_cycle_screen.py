"""Triage across cycles: the sample signed, a week added (``sample/next_week.py``), the screen opened.

Signed series with changed data are stale and say what is due; the filter has "changed since sign-off"
and "shifted"; the evidence says the backtest's numbers and draws the signed curve with the new rows
marked apart; a decision records the model it signs.
"""
from __future__ import annotations

import json
import sys
from dataclasses import replace
from pathlib import Path

import pytest

from fitcore import ledger
from pricefold.cli import main
from tests.tui.conftest import make_app, screen_text, started, until
from tui.factory import sample_source
from tui.listing import FILTERS

SAMPLE = Path(__file__).parents[2] / "sample"


def signed(book: Path) -> int:
    """How many series the first cycle signed (accept-unflagged: one record each)."""
    return sum(1 for line in book.read_bytes().splitlines() if line.strip())


@pytest.fixture(scope="module")
def next_cycle(tmp_path_factory):
    folder = tmp_path_factory.mktemp("cycle")
    sys.path.insert(0, str(SAMPLE))
    try:
        from next_week import extend
    finally:
        sys.path.remove(str(SAMPLE))
    book = folder / "ledger.jsonl"
    assert main(["fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "--date", "week", "--plan",
                 str(SAMPLE / "plan.csv"), "-o", str(folder / "r1.json"), "--quiet"]) == 0
    assert main(["ledger", "accept-unflagged", str(folder / "r1.json"), "--ledger", str(book), "-q"]) == 0
    assert extend(SAMPLE / "wholesale.csv", folder / "week2.csv") == 180
    return book, replace(sample_source(), data=folder / "week2.csv")


def stored_next_cycle(next_cycle, folder: Path) -> tuple[Path, Path]:
    """(a copy of the first cycle's ledger, the next week's Parquet results made by ``fit --ledger`` on it)."""
    book, source = next_cycle
    copy = folder / "ledger.jsonl"
    copy.write_bytes(book.read_bytes())
    out = folder / "r2.parquet"
    assert main(["fit", str(source.data), "--segment", "region", "--date", "week", "--plan", str(SAMPLE / "plan.csv"),
                 "-o", str(out), "--ledger", str(copy), "--quiet"]) == 0
    return copy, out


def app_on_a_copy(next_cycle, tmp_path):
    """(a copy of the first cycle's ledger, a screen on the next week's data recording into it)."""
    book, source = next_cycle
    copy = tmp_path / "ledger.jsonl"
    copy.write_bytes(book.read_bytes())
    return copy, make_app(copy, source)


async def test_signed_series_with_new_rows_are_stale_with_what_is_due(next_cycle, tmp_path):
    book = next_cycle[0]
    copy, app = app_on_a_copy(next_cycle, tmp_path)
    async with app.run_test(size=(160, 50)) as pilot:
        session = await started(app, pilot)
        stale = session._code("stale")
        assert stale.sum() == signed(book) and session.backtest is not None
        shifted = session.diagnosis.flagged("shifted")
        assert 0 < shifted.sum() < 40 and not (shifted & ~stale).any()
        session.set_filter("changed", None)
        assert len(session.view) == signed(book)
        session.set_filter("shifted", None)
        assert len(session.view) == shifted.sum()
        s = int(session.view[0])
        assert session.due(s) in ("backtest failed", "shifted")
        app.screen.refresh_all()
        await pilot.pause(0.3)
        text = screen_text(app)
        assert f"due: {session.due(s)}" in text and "shifted: Signed" in text
        assert "observation since, its error is" in text and "++ signed" in text and "× 1 new since" in text
        passed = next(int(t) for t in range(session.results.n_series)
                      if stale[t] and not shifted[t] and session.backtest_of(t)["status"] == "passed")
        session.set_filter("changed", None)
        session.bring(passed)
        app.screen.refresh_all()
        await pilot.pause(0.3)
        assert "due: backtest passed" in screen_text(app) and "Since sign-off: Signed" in screen_text(app)
        # Accepting it again records this cycle's model, complete, on the new data.
        before = len(ledger.Ledger(copy).records)
        session.decide(session.look(s), "accept", note="the new week is a one-off")
        written = ledger.Ledger(copy).records
        assert len(written) == before + 1 and written[-1]["signed"]["last_date"] == "2026-11-30"  # the added week
        assert written[-1]["signed"]["cov_unscaled"] is not None and "incomplete" not in written[-1]["signed"]
        assert session.status[s] == "accepted" and "changed" in FILTERS


async def test_accepting_a_shifted_series_asks_why_first(next_cycle, tmp_path):
    """Before: ``a`` on a stale series flagged shifted (its signed curve failed its backtest) re-signed it at once,
    with no note: the ledger and the report could not say why the change was signed."""
    copy, app = app_on_a_copy(next_cycle, tmp_path)
    async with app.run_test(size=(160, 50)) as pilot:
        session = await started(app, pilot)
        session.set_filter("shifted", None)
        s = next(int(t) for t in session.view if not session.look(int(t)).stops)  # shifted, no stop flag
        session.bring(s)
        app.screen.refresh_all()
        await pilot.pause(0.3)
        before = copy.read_bytes()
        await pilot.press("a")
        await pilot.pause()
        assert "despite shifted?" in screen_text(app) and copy.read_bytes() == before
        await pilot.press("enter")  # an empty note is refused
        await pilot.pause()
        assert "A note is required here." in screen_text(app) and copy.read_bytes() == before
        await pilot.press(*"new week checked", "enter")
        await until(pilot, lambda: copy.read_bytes() != before)
        written = ledger.Ledger(copy).records[-1]
        assert written["action"] == "accept" and written["note"] == "new week checked" and "shifted" in written["flags"]


def test_stored_results_from_fit_ledger_open_with_their_backtest_and_sign_complete_models(next_cycle, tmp_path):
    """Triage on a Parquet file from ``fit --ledger``: the backtest as the file holds it, before any refit,
    and a decision's snapshot complete from the stored interval parts."""
    from tests.tui.conftest import ANA
    from tui.factory import open_stored_session
    book = next_cycle[0]
    copy, out = stored_next_cycle(next_cycle, tmp_path)
    session = open_stored_session(out, copy, ANA)
    assert not session.results.rows_loaded and session.backtest is not None
    stale = session._code("stale")
    shifted = session.diagnosis.flagged("shifted")
    assert stale.sum() == signed(book) and 0 < shifted.sum() < 40
    s = int(next(t for t in range(session.results.n_series) if shifted[t]))
    assert session.due(s) == "backtest failed" and session.backtest_of(s)["new_rows"] == 1
    written = session.decide(session.look(s), "hold", note="look next week")
    assert written["signed"] is None
    s2 = int(next(t for t in range(session.results.n_series) if stale[t] and not shifted[t]))
    written = session.decide(session.look(s2), "accept", note="fine")
    assert written["signed"]["cov_unscaled"] is not None and "incomplete" not in written["signed"]
    assert written["signed"]["last_date"] == "2026-11-30"


def test_a_screen_on_last_cycles_results_cannot_replace_a_decision_on_this_cycles(next_cycle, tmp_path):
    """Two analysts, one ledger: ana triages this cycle's results, bo still has last cycle's open.  A decision
    bo makes there on a series ana has decided on the newer rows is refused in one line naming the newer
    data, and the ledger is left as it was — for a series signed last cycle and for one that was pending."""
    from tests.tui.conftest import ANA
    from tui.factory import open_stored_session
    book = next_cycle[0]
    copy, out = stored_next_cycle(next_cycle, tmp_path)
    ana = open_stored_session(out, copy, ANA)
    bo = open_stored_session(SAMPLE / "results.parquet", copy, ledger.Identity("bo", "bo", "test-host"))
    stale = ana._code("stale")
    signed_before = int(next(t for t in range(ana.results.n_series) if stale[t]))
    pending = int(next(t for t in range(ana.results.n_series) if ana.status[t] == "pending"))
    ana.decide(ana.look(signed_before), "hold", note="ana looks at it this cycle")
    ana.decide(ana.look(pending), "hold" if not ana.results.chosen[pending] >= 0 else "accept",
               note="ana signs it this cycle")
    for t, action in ((signed_before, "accept"), (pending, "hold")):
        s = bo.index_of(ana.look(t))
        bo.reload_ledger(force=True)  # bo's screen has seen ana's decision (its look every 2 s)
        assert bo.due(s) == "decided on newer data: open the newer results"  # said before a key is pressed
        before = copy.read_bytes()
        with pytest.raises(ledger.LedgerError, match="on newer data .*; open the newer results to decide it$") as info:
            bo.decide(bo.look(s), action, note="bo's note")
        assert copy.read_bytes() == before and "\n" not in str(info.value)
    assert "rows to 2026-11-30; the rows shown end 2026-11-23" in str(info.value)  # the pending one: dates alone
    assert bo.last_date(0) == "2026-11-23" and ana.last_date(0) == "2026-11-30"


async def test_keys_the_newer_decision_refuses_are_hidden_and_the_flag_says_what_is_due(next_cycle, tmp_path):
    """bo on last cycle's results, the series carried to this cycle's rows: the ledger refuses an accept, an
    override or a hold there, so the key line does not offer them (a note still can be added), and the stale
    flag says what the status line says is due instead of "the data behind the last sign-off have changed"."""
    from tui.app import TriageApp
    from tui.factory import open_stored_session
    copy, out = stored_next_cycle(next_cycle, tmp_path)
    assert main(["ledger", "carry", str(out), "--ledger", str(copy), "-q"]) == 0
    bo = ledger.Identity("bo", "bo", "test-host")
    app = TriageApp(lambda progress: open_stored_session(SAMPLE / "results.parquet", copy, bo, None, progress))
    async with app.run_test(size=(80, 24)) as pilot:
        session = await started(app, pilot)
        newer = [s for s in range(session.results.n_series) if session.decided_on_newer(s)]
        carried = [r["series"] for r in ledger.Ledger(copy).records if r["action"] == "carry"]
        # the carried series (accept-unflagged's less those left for a human), read from the ledger
        assert sorted(json.dumps(session.results.data.key_of(s), sort_keys=True) for s in newer) == sorted(
            json.dumps(key, sort_keys=True) for key in carried) and len(newer) > 100
        session.bring(newer[0])
        app.screen.refresh_all()
        await until(pilot, lambda: "n note" in screen_text(app) and "a accept" not in screen_text(app))
        text = screen_text(app)
        assert "o override" not in text and "h hold" not in text
        before = copy.read_bytes()
        await pilot.press("a", "h")
        await pilot.pause()
        assert copy.read_bytes() == before and "Not recorded" not in screen_text(app)
        await pilot.press("enter")
        await until(pilot, lambda: "stale: Decided on newer data: open the newer results." in screen_text(app))
        assert "behind the last sign-off" not in screen_text(app)
        await pilot.press("escape")
        pending = next(s for s in range(session.results.n_series) if session.status[s] == "pending"
                       and session.results.chosen[s] >= 0)
        session.bring(pending)
        app.screen.refresh_all()
        await until(pilot, lambda: "a accept" in screen_text(app) and "h hold" in screen_text(app))


async def test_a_backtest_against_another_ledger_is_left_out_and_said_once(next_cycle, tmp_path):
    """This week's results fitted with --ledger on one copy of the ledger, opened on another: their backtest and
    'shifted' flags speak of the first copy, so the screen leaves both out (as ``show --ledger`` does) and says
    so on the header; once the data are fitted here, the screen's own backtest against this ledger is shown.
    Before: the file's backtest and flags were shown as this ledger's."""
    from tui.app import TriageApp
    from tui.factory import open_stored_session, refit_stored, source_from_results
    from tui.widgets.status_line import fitted_text
    copy, out = stored_next_cycle(next_cycle, tmp_path)
    other = tmp_path / "other.jsonl"
    other.write_bytes(copy.read_bytes())
    app = TriageApp(lambda progress: open_stored_session(out, other, ledger.Identity("cy", "cy", "h"), None, progress))
    async with app.run_test(size=(100, 30), notifications=True) as pilot:
        session = await started(app, pilot)
        assert session.backtest is None and not session.diagnosis.flagged("shifted").any()
        assert session._code("stale").sum() == signed(next_cycle[0])  # the statuses are this ledger's all the same
        said = " ".join(screen_text(app).split())
        # both ledgers on the header (two lines at most: long paths cut, the rest under ?)
        assert f"Recording into {other}, not {copy}" in said and said.count(f"not {copy}") == 1
        assert fitted_text(session) == (f"Recording into {other}, not {copy}, the ledger these results were "
                                        "fitted against: their backtest and 'shifted' flags are left out")
        session.set_filter("changed", None)
        app.screen.refresh_all()
        await pilot.pause(0.3)
        assert "Since sign-off" not in screen_text(app) and "?shifted" not in screen_text(app)
        assert session.upgrade(*refit_stored(source_from_results(out)))  # the observations' fit
        app.screen.refresh_all()
        await until(pilot, lambda: fitted_text(session).endswith("(backtested again here, against other.jsonl)"))
        assert session.backtest is not None and session.diagnosis.flagged("shifted").any()


async def test_results_fitted_against_records_the_ledger_no_longer_holds_are_said_on_the_header(next_cycle, tmp_path):
    """The ledger's last record cut off after 'fit --ledger' read it (or an older copy put back): a trial's screen
    said nothing of it, while 'ledger carry' refused the results.  Now the header says it in carry's words and the
    file's backtest, which read records that are gone, is left out, as for a backtest against another ledger."""
    from tui.app import TriageApp
    from tui.factory import open_stored_session
    copy, out = stored_next_cycle(next_cycle, tmp_path)
    copy.write_bytes(b"".join(copy.read_bytes().splitlines(keepends=True)[:-1]))
    app = TriageApp(lambda progress: open_stored_session(out, copy, ledger.Identity("cy", "cy", "h"), None, progress))
    async with app.run_test(size=(100, 30)) as pilot:
        session = await started(app, pilot)
        said = " ".join(screen_text(app).split())
        assert f"{copy} no longer holds record {signed(next_cycle[0])}:" in said
        assert "its backtest and 'shifted' flags are left out" in said
        assert session.backtest is None and not session.diagnosis.flagged("shifted").any()


async def test_on_older_results_the_since_sign_off_block_does_not_call_their_proposal_this_cycles(next_cycle,
                                                                                                   tmp_path):
    """bo on last cycle's results after this cycle's carry: the backtest of the carried curve sets it beside the
    proposal of the results on screen, which are older — not "this cycle's proposal"."""
    from tui.app import TriageApp
    from tui.factory import open_stored_session, refit_stored, source_from_results
    copy, out = stored_next_cycle(next_cycle, tmp_path)
    assert main(["ledger", "carry", str(out), "--ledger", str(copy), "-q"]) == 0
    bo = ledger.Identity("bo", "bo", "test-host")
    app = TriageApp(lambda progress: open_stored_session(SAMPLE / "results.parquet", copy, bo, None, progress))
    async with app.run_test(size=(160, 50)) as pilot:
        session = await started(app, pilot)
        assert session.upgrade(*refit_stored(source_from_results(SAMPLE / "results.parquet")))  # backtested here
        newer = next(s for s in range(session.results.n_series) if session.decided_on_newer(s)
                     and session.backtest_of(s) is not None and "shifted" not in session.flag_codes(s))
        session.set_filter("all", None)
        session.bring(newer)
        app.screen.refresh_all()
        await until(pilot, lambda: "Since sign-off: Accepted" in screen_text(app))
        # the evidence panel's lines (right of the list) read as one text: its sentence wraps there
        said = " ".join(line.split("▕", 1)[1].strip() for line in screen_text(app).splitlines() if "▕" in line)
        assert "The proposal of these older results, " in said and "This cycle's proposal" not in said
        assert "Accepted 2026-" in said and ", carried 2026-" in said  # whose accept, and who carried it
        assert "forward at" in said and "(carries accept by " in said  # the status line too
