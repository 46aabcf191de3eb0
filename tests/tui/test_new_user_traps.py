"""A new user's trial at 80×24 and 60×20: the small traps of the triage screen.

A dialog's list went round from its first row to its last (↑ once too often signed poly5 for poly0) and opened
with no row lit; a stale row cut the name of the model it proposes; the help's scrollbar drew two stray glyphs, one
glued to the text; Ctrl+C dropping a typed note said nothing of it and exited 0; an empty list never named
``ledger accept-unflagged``; at 60×20 a message took the override dialog's keys and border, and wide numbers cut
every candidate's elasticity to "…"."""
from __future__ import annotations

import shlex

import pytest

from fitcore.data.columns import Columns
from pricefold import triage_cli
from pricefold.cli import main
from tui.app import TriageApp
from tui.factory import Source, open_session, source_from_results
from tui.screens.dialogs import ChoiceDialog, MessageDialog, TextDialog
from tui.screens.override import OverrideDialog
from tui.widgets.series_list import short_flags

from .conftest import ANA, make_app, screen_text, started, until
from .test_help_and_words import help_at_its_end
from .test_key_columns_screen import SAMPLE, signed_by_region
from .test_screen_layout import clean_source, straight_lines


async def open_override(app, pilot) -> OverrideDialog:
    await pilot.press("o")
    await until(pilot, lambda: isinstance(app.screen, OverrideDialog))
    await pilot.pause()
    return app.screen


@pytest.mark.parametrize("size", [(80, 24), (60, 20)])
async def test_the_override_list_stops_at_its_ends(ledger_path, size):
    """↑ pressed more often than the top needs stays on the top model; ↓ likewise at the bottom."""
    app = make_app(ledger_path)
    async with app.run_test(size=size) as pilot:
        await started(app, pilot)
        dialog = await open_override(app, pilot)
        options = dialog.query_one("#dialog-options")
        last = options.option_count - 1
        assert last >= 2
        await pilot.press(*["up"] * (options.option_count + 1))
        assert options.highlighted == 0
        await pilot.press(*["down"] * (options.option_count + 1))
        assert options.highlighted == last
        await pilot.press("up")
        assert options.highlighted == last - 1  # it moves, one row a press


async def test_a_choice_list_stops_at_its_ends(ledger_path):
    """The filter's choices (as a confirmation's Yes/No) went round too."""
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        await started(app, pilot)
        await pilot.press("f")
        await until(pilot, lambda: isinstance(app.screen, ChoiceDialog))
        options = app.screen.query_one("#dialog-options")
        await pilot.press("home", "up")
        assert options.highlighted == 0
        await pilot.press("end", "down")
        assert options.highlighted == options.option_count - 1


def row_backgrounds(app, text: str) -> set:
    """The background colours of the screen line holding ``text``, through the app's line filters (``NO_COLOR``'s
    monochrome among them), as the terminal gets them."""
    strips = app.screen._compositor.render_strips()
    [strip] = [strip for strip in strips if text in strip.text]
    segments = list(strip)
    for line_filter in app.get_line_filters():
        segments = line_filter.apply(segments, app.screen.styles.background)
    return {segment.style.bgcolor for segment in segments if segment.style is not None and segment.text.strip()}


@pytest.mark.parametrize("no_color", [False, True])
async def test_the_override_dialog_opens_with_the_proposal_highlighted(ledger_path, monkeypatch, no_color):
    """The dialog opens on the proposal, which was drawn only dimmed (Textual draws a disabled option without its
    highlight): nothing on screen said where ↑ and ↓ would start from."""
    if no_color:
        monkeypatch.setenv("NO_COLOR", "1")
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        await started(app, pilot)
        dialog = await open_override(app, pilot)
        options = dialog.query_one("#dialog-options")
        proposed = next(i for i, row in enumerate(dialog.rows) if row.proposed)
        assert options.highlighted == proposed
        other = next(i for i, row in enumerate(dialog.rows) if not row.proposed)
        lit, plain = (options.get_option_at_index(i).prompt.plain.split("\n")[0] for i in (proposed, other))
        assert row_backgrounds(app, lit) != row_backgrounds(app, plain)
        options.highlighted = other  # the highlight moves: the lit row is the one highlighted, not the proposal
        await pilot.pause()
        assert row_backgrounds(app, plain) != row_backgrounds(app, lit)
        await pilot.press("enter")  # a model other than the proposal is picked
        await until(pilot, lambda: isinstance(app.screen, TextDialog))


async def test_enter_on_the_highlighted_proposal_picks_nothing(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24), notifications=True) as pilot:
        await started(app, pilot)
        dialog = await open_override(app, pilot)
        await pilot.press("enter")
        await pilot.pause()
        assert app.screen is dialog
        assert any("is the proposal: move to another candidate" in n.message for n in app._notifications)


def next_week(folder) -> Source:
    """The sample a week later, as README's "Each cycle" makes it (``sample/next_week.py``)."""
    import subprocess
    import sys
    subprocess.run([sys.executable, str(SAMPLE / "next_week.py"), str(folder / "next.csv")], check=True,
                   capture_output=True)
    return Source(data=folder / "next.csv", columns=Columns(segments=("region",), date="week"),
                  plan_file=SAMPLE / "plan.csv")


@pytest.mark.parametrize("size, lead", [((80, 24), "proposes {} "), ((60, 20), "→{} ")])
async def test_a_stale_row_keeps_the_proposed_models_name_whole(ledger_path, tmp_path, size, lead):
    """At 80×24 the sample's second cycle read '! carrots 1 kg · North … loglog 47% proposes pol… !rising !stale':
    the flags after the name give way, counted ('+1'), and where even then there is no room, the lead is
    '→poly5'."""
    signed_by_region(ledger_path)
    app = make_app(ledger_path, next_week(tmp_path))
    async with app.run_test(size=size) as pilot:
        session = await started(app, pilot)
        names = session.results.names
        session.set_filter("changed")
        app.screen.refresh_all()
        await pilot.pause()
        listing = app.screen.query_one("#series-list")
        rows = list_rows(app)
        checked = 0
        for s, row in zip(session.view.tolist(), rows):
            proposal = names[int(session.results.chosen[s])]
            if session.listed_model(s)[0].rstrip("↺") == proposal:
                continue
            assert lead.format(proposal) in row, row
            _, flags = listing.columns(listing.scrollable_content_region.width)
            rest = flags - len(lead.format(proposal))  # the flags after it, counted where cut
            assert lead.format(proposal) + short_flags(session.listed_flags(s), rest) in row, row
            checked += 1
        assert checked


def list_rows(app) -> list[str]:
    """The list's rows on screen, under its head, as wide as the list."""
    region = app.screen.query_one("#series-list").scrollable_content_region
    lines = screen_text(app).splitlines()[region.y + 1:region.bottom]
    return [line[region.x:region.right] for line in lines]


def scrollbar_column(app, dialog) -> tuple[int, list[str]]:
    bar = dialog.vertical_scrollbar.region
    lines = screen_text(app).splitlines()[bar.y:bar.bottom]
    return bar.x, lines


async def test_the_helps_scrollbar_is_one_thumb_with_a_blank_column_beside_the_text(ledger_path):
    """After PgUp the help showed two scrollbar glyphs (the thumb's eighth-cell ends on a dark track), one glued to
    the text ('outside the▆').  The thumb is whole cells, and a blank column parts it from the text."""
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        await started(app, pilot)
        await help_at_its_end(pilot)
        dialog = app.screen.query_one("#message-scroll")
        assert isinstance(app.screen, MessageDialog)
        for _ in range(8):
            await pilot.press("pageup")
            await pilot.pause()
            x, lines = scrollbar_column(app, dialog)
            assert all(line[x] == " " for line in lines), [line[x - 3:x + 2] for line in lines]
            assert all(line[x - 1] == " " for line in lines), [line[x - 12:x + 1] for line in lines]
        assert dialog.scroll_y == 0


async def test_ctrl_c_twice_with_a_note_typed_is_an_interrupt_that_says_the_note_is_lost(ledger_path):
    app = make_app(ledger_path)
    async with app.run_test(size=(80, 24)) as pilot:
        await started(app, pilot)
        await pilot.press("n", *"why", "ctrl+c")
        await pilot.pause()
        assert app.is_running
        await pilot.press("ctrl+c")
        await pilot.pause()
        assert not app.is_running
    # README: an interrupt exits 128 + the signal's number, as `kill` does here (143): Ctrl+C is SIGINT's 2
    assert app.return_code == 130 and app.note_lost and app.stopped_by is None


@pytest.mark.parametrize("size", [(80, 24), (60, 20), (120, 40)])
async def test_an_empty_list_names_the_command_that_accepts_the_unflagged(tmp_path, ledger_path, size):
    app = make_app(ledger_path, clean_source(tmp_path))
    async with app.run_test(size=size) as pilot:
        session = await started(app, pilot)
        session.accept_command = triage_cli.accept_command(tmp_path / "my results.json", tmp_path / "d.csv",
                                                           ledger_path)
        app.screen.refresh_all()
        await pilot.pause()
        # the list's words, joined without the spaces wrapping took (a long path is broken where the line ends)
        said = "".join("".join(list_rows(app)).split())
        assert "Nothingneedsadecision:3undecidedseriescarrynoflag." in said
        command = f"ledger accept-unflagged '{tmp_path}/my results.json' --ledger {ledger_path}"
        assert "".join(command.split()) in said, said
        session.set_filter("held")  # another view, empty too: the pending unflagged said and the command named
        app.screen.refresh_all()
        await pilot.pause()
        said = "".join("".join(list_rows(app)).split())
        assert "3pendingseriescarrynoflag." in said and "".join(command.split()) in said, said


async def test_the_command_named_accepts_the_series_said(tmp_path, ledger_path, capsys):
    """The command the screen names, run as written: it accepts as many series as the screen said."""
    results = tmp_path / "r.json"
    assert main(["fit", str(SAMPLE / "wholesale.csv"), "--segment", "region", "--date", "week", "--plan",
                 str(SAMPLE / "plan.csv"), "-o", str(results), "-q"]) == 0
    app = TriageApp(lambda progress: open_session(source_from_results(results), ledger_path, ANA, None, progress))
    async with app.run_test(size=(80, 24)) as pilot:
        session = await started(app, pilot)
        session.accept_command = triage_cli.accept_command(results, SAMPLE / "wholesale.csv", ledger_path)
        session.set_filter("held")
        app.screen.refresh_all()
        await pilot.pause()
        said = session.empty_words()
    count = int(next(line for line in said if line.endswith("carry no flag.")).split()[0].replace(",", ""))
    command = shlex.split(said[-1].split(": ", 1)[1])
    assert command[1:3] == ["ledger", "accept-unflagged"]
    capsys.readouterr()
    assert main(command[1:]) == 0
    assert f"accepted {count:,} unflagged series" in capsys.readouterr().err
    assert count == 154  # README: "154 series (86%) carry none" of the sample's 180


async def test_at_60x20_a_message_leaves_the_override_dialogs_keys_and_border(ledger_path):
    """Enter on the proposal at 60×20: its message took the rows of the keys' line and the list's lower border."""
    app = make_app(ledger_path)
    async with app.run_test(size=(60, 20), notifications=True) as pilot:
        await started(app, pilot)
        dialog = await open_override(app, pilot)
        await pilot.press("enter")  # refused: a message at the foot of the screen
        await until(pilot, lambda: "is the proposal" in screen_text(app))
        await pilot.pause(0.2)
        box, options = dialog.query_one(".dialog"), dialog.query_one("#dialog-options")
        hint = dialog.query_one("#override-hint-short")
        assert hint.display and hint.region.bottom <= box.content_region.bottom
        assert options.region.bottom <= box.content_region.bottom  # its lower border inside the box
        assert "Enter to choose · Esc to cancel" in screen_text(app)
        highlighted = options.highlighted  # still in view
        assert options.scroll_y <= 2 * highlighted < options.scroll_y + options.scrollable_content_region.height


def wide_numbers(tmp_path) -> Source:
    """Three invented series selling hundreds of thousands a week, noisy: CV errors in the tens of millions, as
    a 3,000-series file's were."""
    return Source(data=straight_lines(tmp_path / "wide.csv", 10, 0.25, 400_000, 9_000, 9_000), columns=Columns(),
                  plan_price=31.0)


async def test_at_60x20_every_candidates_elasticity_is_whole(tmp_path, ledger_path):
    """At 60×20 every candidate's elasticity read '…': its digits go before any flag text."""
    app = make_app(ledger_path, wide_numbers(tmp_path))
    async with app.run_test(size=(60, 20)) as pilot:
        await started(app, pilot)
        app.session.set_filter("all")
        app.screen.refresh_all()
        await pilot.pause()
        dialog = await open_override(app, pilot)
        options = dialog.query_one("#dialog-options")
        assert dialog.narrow and any(len(row.cv_mse) >= 10 for row in dialog.rows)
        for i, row in enumerate(dialog.rows):
            options.highlighted = i
            await pilot.pause()
            text = screen_text(app)
            [first] = [line for line in text.splitlines() if f" {row.name} " in line]
            second = text.splitlines()[text.splitlines().index(first) + 1]
            assert row.volume in first and row.q2 in first and row.cv_mse in first, first
            if row.elasticity != "—":  # (none where the volume is not above zero)
                assert f" {row.elasticity} " in f"{first} {second} ", (first, second)
            assert f"PI {row.interval}" in second, second
