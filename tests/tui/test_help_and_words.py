"""Words on the screen: no "-0%", the help's ledger head clear of the scrollbar, every filter named in the
help, and a filter prompt that says what a flag choice does."""
from __future__ import annotations

import numpy as np
import pytest

from fitcore import ledger
from pricefold.show import percent as show_percent
from tests.tui.conftest import make_app, screen_text, started, until
from tui.cells import percent
from tui.listing import FILTER_TITLES, FILTERS


@pytest.mark.parametrize("share, shown", [(-0.004, "0%"), (-0.0049, "0%"), (0.004, "0%"), (-0.0051, "-1%"),
                                          (0.0, "0%"), (-0.04, "-4%"), (0.985, "98%"), (float("nan"), "—")])
def test_a_share_that_rounds_to_zero_has_no_sign(share, shown):
    assert percent(share) == shown
    assert show_percent(share) == shown


async def test_no_minus_zero_on_screen(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(160, 50)) as pilot:
        session = await started(app, pilot)
        results = session.results
        near = np.flatnonzero((results.q2 > -0.005) & (results.q2 < 0) & results.available)
        assert len(near)  # the sample has candidates whose Q² rounds to a negative zero
        s = int(np.argwhere((results.q2 > -0.005) & (results.q2 < 0) & results.available)[0][0])
        session.set_filter("all", None)
        session.cursor = int((session.view == s).nonzero()[0][0])
        app.screen.refresh_all()
        await pilot.pause(0.5)
        assert "-0%" not in screen_text(app)
        await pilot.press("o")
        await pilot.pause()
        assert "-0%" not in screen_text(app)


async def help_at_its_end(pilot) -> None:
    """The help opened and scrolled to its end, where the ledger's head is."""
    await pilot.press("question_mark")
    await pilot.pause()
    await pilot.press("end")
    await pilot.pause()


@pytest.mark.parametrize("size", [(80, 24), (120, 40)])
async def test_the_help_shows_the_ledger_head_whole_beside_the_scrollbar(ledger_path, size):
    app = make_app(ledger_path)
    async with app.run_test(size=size) as pilot:
        session = await started(app, pilot)
        for s in session.view[:12]:  # a head of two digits: 69 characters with its indent
            session.decide(session.look(int(s)), "note", note="seen")
        await help_at_its_end(pilot)
        head = ledger.Ledger(ledger_path).head_text
        assert head.startswith("12:")
        [line] = [line for line in screen_text(app).splitlines() if head in line]
        after = line[line.index(head) + len(head):].split("│")[0]  # up to the dialog's border
        assert after.strip() == "", line  # nothing drawn after it: the scrollbar has a column of its own


@pytest.mark.parametrize("size", [(80, 24), (60, 20)])
async def test_the_help_shows_a_four_digit_head_whole_at_80_columns(ledger_path, size):
    """At 80 columns a head of sequence number 2150 ran one character past the text's width: the digest's last
    character alone on the next line, beside the scrollbar's thumb — read or copied from there, a wrong head.
    Whole on one line at 80 columns; folded where the screen is narrower, its parts adding up to the head."""
    import csv
    from tests.tui.test_key_columns_screen import SAMPLE
    with open(SAMPLE / "wholesale.csv", newline="") as handle:
        keys = sorted({(row["product"], row["region"]) for row in csv.DictReader(handle)})
    latest = {}
    for round_ in range(6):  # one note a series an append: 6 × 180 records
        written = ledger.append(ledger_path, [ledger.Entry(
            series={"product": p, "region": r}, action="note", fingerprint="f" * 64, results="ab" * 32,
            note=f"look {round_}", supersedes=latest.get((p, r))) for p, r in keys], ledger.Identity("bo", "bo", "h"))
        latest = {(record["series"]["product"], record["series"]["region"]): record["digest"] for record in written}
    app = make_app(ledger_path)
    async with app.run_test(size=size) as pilot:
        await started(app, pilot)
        await help_at_its_end(pilot)
        head = ledger.Ledger(ledger_path).head_text
        assert head.startswith("1080:")
        dialog = app.screen.query_one(".dialog").region
        lines = [line[dialog.x:dialog.right].strip(" │▁▂▃▄▅▆▇█") for line in screen_text(app).splitlines()]
        at = next(i for i, line in enumerate(lines) if line.startswith(head[:20]))
        if size[0] >= 80:
            assert lines[at] == head, lines[at:at + 2]
        else:
            assert "".join(lines[at:at + 2]) == head, lines[at:at + 2]


async def test_the_help_names_every_filter_and_the_prompt_says_what_a_flag_does(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(160, 50)) as pilot:
        await started(app, pilot)
        await pilot.press("question_mark")
        await until(pilot, lambda: "Keys" in screen_text(app))  # the keys come first: f's line on the first page
        text = " ".join(screen_text(app).split())
        from tui.help import KEYS
        filters = dict(KEYS)["f"]  # the f line as the help draws it (wrapped there between the dialog's borders)
        assert f"filter: {FILTER_TITLES['attention']};" in text
        for name in FILTERS:
            assert FILTER_TITLES[name] in filters, name
        await pilot.press("escape", "f")
        await pilot.pause()
        text = " ".join(screen_text(app).split())
        assert "a flag keeps the status, and back" not in text and "A status, or a flag within the status" in text


def test_wrapped_breaks_between_words_and_cuts_only_the_last_line():
    from rich.cells import cell_len
    from tui.cells import wrapped
    said = "status overridden: Anna Maria (anna) overrode the proposal with poly5 at 08:51:36 UTC"
    assert wrapped(said, 60, 2) == ["status overridden: Anna Maria (anna) overrode the proposal",
                                    "with poly5 at 08:51:36 UTC"]
    assert wrapped(said, 60, 1) == [said[:59] + "…"] and wrapped("short", 60, 2) == ["short"]
    assert all(cell_len(line) <= 10 for line in wrapped("数据" * 20, 10, 3))


async def test_a_long_status_keeps_its_time_on_a_second_line(ledger_path):
    """At 80×24 "status overridden: ana (root) overrode the proposal with poly5 at …" lost the time: the title's
    third line, the news's when there is news, takes the rest of the status."""
    who = ledger.Identity("Anna Maria Longname", "anna", "server-1")
    app = make_app(ledger_path, who=who)
    async with app.run_test(size=(80, 24)) as pilot:
        session = await started(app, pilot)
        s = session.current
        shown = session.shown
        other = next(c for c in range(len(session.results.names)) if c != session.results.chosen[s]
                     and session.results.available[s, c])
        app.screen.decide(shown, "override", model=session.results.names[other], note="contract floor")
        session.set_filter("all", None)
        session.cursor = int((session.view == s).nonzero()[0][0])
        session.news = None
        app.screen.refresh_all()
        await pilot.press("enter")  # narrow: the evidence instead of the list
        await pilot.pause(0.3)
        title = str(app.screen.query_one("#ev-title").render())
        assert "Anna Maria Longname (anna) overrode the proposal with" in title and " UTC" in title
        assert title.count("\n") == 2 and "…" not in title
