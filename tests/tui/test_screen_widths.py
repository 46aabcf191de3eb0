"""Small faults new users met on the triage screen, each checked at the size it was seen: a note over the help,
the header's name at 100 columns, the override dialog's interval at 60×20, names cut in the two-pane list, the
evidence title's price range, a candidate's reason wrapping at the pane's edge, the help's scrollbar."""
from __future__ import annotations

import pytest
from rich.console import Console
from textual.widgets._toast import Toast

from fitcore.ledger import Identity

from pricefold.demo import COMPILING_NOTE
from tests.tui.conftest import make_app, screen_text, started, until
from tui.screens.dialogs import MessageDialog
from tui.screens.override import OverrideDialog
from tui.widgets.status_line import listed_text

WHO_KEEPS = 8  # cells of the name kept beside the title at least


async def test_a_note_that_arrives_while_the_help_is_open_leaves_the_help_whole(ledger_path):
    """The compiling note (a ten-second warning on the first run) came over the help's last lines."""
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24), notifications=True) as pilot:
        await started(app, pilot)
        await pilot.press("question_mark")
        await pilot.pause()
        assert isinstance(app.screen, MessageDialog)
        app.notify(COMPILING_NOTE, severity="warning", timeout=10, markup=False)
        await until(pilot, lambda: bool(app.screen.query(Toast)))
        await pilot.pause()
        dialog = app.screen.query_one(".dialog").region
        toasts = [toast.region for toast in app.screen.query(Toast)]
        assert toasts and all(toast.height > 0 for toast in toasts)
        assert not any(dialog.overlaps(toast) for toast in toasts), (dialog, toasts, screen_text(app))


@pytest.mark.parametrize("who", ["ana", "trial-analyst-0042", "a-rather-long-os-user-name"])
@pytest.mark.parametrize("filter_, flag, sort", [("attention", None, "attention"), ("pending", "near-tie", "score")])
async def test_the_header_keeps_its_name_at_100_columns(ledger_path, who, filter_, flag, sort):
    """Without --analyst the name is the OS user's: a long one, or a longer listing, dropped "pricefold
    triage" from the header at 100 columns, where there is room for it beside the name (cut if need be)."""
    app = make_app(ledger_path, who=Identity(who, who, "test-host"))
    async with app.run_test(size=(100, 30)) as pilot:
        session = await started(app, pilot)
        session.set_filter(filter_, flag)
        session.set_sort(sort)
        app.screen.refresh_all()
        await pilot.pause()
        first = screen_text(app).splitlines()[0]
        assert first.strip().startswith("pricefold triage"), first
        assert listed_text(session) in first, first  # what is listed, whole
        assert who[:WHO_KEEPS - 1] in first, first  # and who decides, cut at most


@pytest.mark.parametrize("size", [(60, 20), (80, 24)])
async def test_the_override_dialog_shows_each_models_interval_whole(ledger_path, size):
    """At 60×20 the interval column ran off the dialog ("418.2 to…") and the hint lost "Esc to cancel"."""
    app = make_app(ledger_path)
    async with app.run_test(size=size) as pilot:
        await started(app, pilot)
        await pilot.press("o")
        await pilot.pause()
        await pilot.pause()
        dialog = app.screen
        assert isinstance(dialog, OverrideDialog)
        text = screen_text(app)
        shown = [row for row in dialog.rows if f" {row.name} " in text]
        assert len(shown) >= 2, text
        for row in shown:
            assert row.interval in text and row.volume in text, text
        assert "Esc to cancel" in text and "…" not in text.split("Override the proposal")[1], text
        options = dialog.query_one("#dialog-options")
        assert options.virtual_size.height == 2 * len(dialog.rows)  # two lines a model, never wrapped


@pytest.mark.parametrize("size", [(120, 40), (125, 40), (130, 40)])
async def test_names_keep_their_middle_in_the_two_pane_list(ledger_path, size):
    """At 120–130 columns the list had 22–24 cells for names ("cherry …250 g · South") beside an evidence pane
    with room to spare; the sample's names (29 cells at most) are whole there now, the flags column readable
    and the evidence 52 cells at least (its title and charts whole)."""
    app = make_app(ledger_path)
    async with app.run_test(size=size) as pilot:
        session = await started(app, pilot)
        session.set_filter("all", None)
        app.screen.refresh_all()
        await pilot.pause()
        listing = app.screen.query_one("#series-list")
        lines = screen_text(app).splitlines()[listing.region.y + 1:listing.region.bottom]  # under the list's head
        rows = [line[:listing.region.width] for line in lines]
        shown = [int(s) for s in session.view[:len(rows)]]
        assert max(len(session.label(s)) for s in shown) >= 29
        for s, row in zip(shown, rows):
            assert f" {session.label(s)} " in row, row
        _, flags = listing.columns(listing.scrollable_content_region.width)
        assert flags >= len("!outside-range")
        assert app.screen.query_one("#evidence").region.width >= 52


async def test_the_evidence_title_keeps_the_price_range_whole_beside_a_whole_name(ledger_path):
    """With the evidence at 52 cells, "table salt 1 kg · South  104 obs, prices 0.60–0.…" lost its highest price:
    the counts now follow the status line when the name alone fills the first."""
    app = make_app(ledger_path)
    async with app.run_test(size=(120, 40)) as pilot:
        session = await started(app, pilot)
        results = session.results
        evidence = app.screen.query_one("#evidence")
        title = [line[evidence.region.x:] for line in screen_text(app).splitlines()[evidence.region.y:][:2]]
        s = session.current
        lo, hi = f"{results.price_lo[s]:.2f}", f"{results.price_hi[s]:.2f}"
        assert session.label(s) in title[0]
        assert any(f"prices {lo}–{hi}" in line for line in title), title
        assert "status pending" in title[1]


async def test_the_help_has_the_panes_thin_scrollbar(ledger_path):
    """The help's two-cell thumb on an unlit track read as stray blocks beside the text ("worth▁▁"), as the
    panes' did before theirs became one cell on a visible track."""
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        await started(app, pilot)
        await pilot.press("question_mark")
        await pilot.pause()
        dialog = app.screen.query_one(".dialog")
        assert dialog.show_vertical_scrollbar
        assert dialog.vertical_scrollbar.region.width == 1
        listing = app.screen_stack[-2].query_one("#series-list")
        assert dialog.styles.scrollbar_background == listing.styles.scrollbar_background


async def test_a_candidates_reason_wraps_under_itself(ledger_path):
    """At 80 columns "poly2: 2 distinct prices … (too few, or too" went on at the pane's edge ("close together)"),
    where it read as a line of its own."""
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        session = await started(app, pilot)
        s = session.current
        results = session.results
        missing = [c for c in range(len(results.names)) if not results.available[s, c]]
        assert missing  # the first series listed (two distinct prices) has candidates it cannot fit
        table = app.screen.evidence.candidate_table(s)
        console = Console(width=76, record=True, color_system=None)
        console.print(table)
        lines = console.export_text().splitlines()
        name = results.names[missing[0]]
        at = next(i for i, line in enumerate(lines) if line.startswith(f"  {name}: "))
        indent = len(f"  {name}: ")
        assert lines[at + 1].startswith(" " * indent) and lines[at + 1].strip(), lines[at:at + 2]
        assert (lines[at].strip() + " " + lines[at + 1].strip()).endswith(results.reason_text(s, missing[0]))
