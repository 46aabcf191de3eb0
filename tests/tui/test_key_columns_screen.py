"""The screen where results meet a ledger keyed by other columns: said before any decision, and the first
decision confirmed naming both column sets (``fitcore.ledger.key_columns.mismatch``, the one check the ledger
commands ask), also when another analyst's append brings a new set of key columns while the screen is open.

The ledger is the sample's (series keyed by product and region, ``accept-unflagged``); the other results
are the sample fitted by product alone (a fit with another segment column reads the same way).
"""
from __future__ import annotations

import io
import json
from pathlib import Path

import pytest
from rich.console import Console

from fitcore import ledger
from fitcore.data.columns import Columns
from pricefold.cli import main
from tui.factory import Source
from tui.screens.dialogs import ChoiceDialog, MessageDialog, TextDialog
from tui.session import Refused

from .conftest import ANA, make_app, screen_text, started, until

SAMPLE = Path(__file__).resolve().parents[2] / "sample"
BO = ledger.Identity("bo", "bo", "other-host")
BY_PRODUCT = Source(data=SAMPLE / "wholesale.csv", columns=Columns())  # 60 series keyed by product alone
DIFFER = "series keyed by product, but those in ledger.jsonl by product, region (not one of its series is in these results)"


def signed_by_region(path: Path) -> None:
    assert main(["ledger", "accept-unflagged", str(SAMPLE / "results.parquet"), "--ledger", str(path), "-q"]) == 0


def words(app) -> str:
    return " ".join(screen_text(app).split())


def series_of(path: Path) -> list[dict]:
    return [json.loads(line)["series"] for line in path.read_text().splitlines()]


async def held_after_yes(app, pilot, ledger_path: Path) -> None:
    """'h', "Yes" in the dialog, the hold (no note needed): the 155th record written."""
    await pilot.press("h")
    await until(pilot, lambda: isinstance(app.screen, ChoiceDialog))
    await pilot.press("up", "enter")  # Yes
    await until(pilot, lambda: isinstance(app.screen, TextDialog))
    await pilot.press("enter")  # a hold needs no note
    await until(pilot, lambda: len(series_of(ledger_path)) == 155)


async def test_other_key_columns_are_said_and_the_first_decision_asks_naming_both(ledger_path):
    """Before: every product took a region's decisions (58 stale) and 'h' went straight to the note box."""
    signed_by_region(ledger_path)
    before = ledger_path.read_bytes()
    app = make_app(ledger_path, BY_PRODUCT)
    async with app.run_test(size=(80, 24)) as pilot:
        session = await started(app, pilot)
        assert session.counts()["stale"] == 0 and session.counts()["pending"] == 60
        assert f"Key columns differ: {DIFFER}; every series reads as pending" in words(app)
        await pilot.press("question_mark")
        await until(pilot, lambda: isinstance(app.screen, MessageDialog))
        console = Console(width=200, record=True, file=io.StringIO())
        console.print(app.screen.body)  # the help, all of it (it scrolls at 80×24)
        assert f"Ledger {ledger_path}\n  intact\n  Key columns differ: {DIFFER}" in console.export_text()
        await pilot.press("escape")
        for cancel in (("escape",), ("enter",)):  # Esc, or Enter on "No" (where the dialog opens)
            await pilot.press("h")
            await until(pilot, lambda: isinstance(app.screen, ChoiceDialog))
            said = words(app)
            assert "by product, region" in said and "Yes: decide on series keyed by product in ledger.jsonl" in said
            await pilot.press(*cancel)
            await until(pilot, lambda: not isinstance(app.screen, ChoiceDialog))
            assert not isinstance(app.screen, TextDialog) and ledger_path.read_bytes() == before
        await held_after_yes(app, pilot, ledger_path)
        assert series_of(ledger_path)[-1].keys() == {"product"}
        # the ledger now holds both sets: these results are keyed as one of them, and nothing more is asked
        await until(pilot, lambda: "Key columns differ" not in words(app))


async def test_another_analysts_new_key_set_is_said_at_once_and_asked_before_the_next_decision(ledger_path):
    """ana's screen opened on an empty ledger (any key columns fit it); bo signs series keyed by product and region.
    Within a poll ana's header and a notification say so, and her next decision asks first."""
    app = make_app(ledger_path, BY_PRODUCT)
    async with app.run_test(size=(100, 30), notifications=True) as pilot:
        await started(app, pilot)
        assert "Key columns differ" not in words(app)
        signed_by_region(ledger_path)  # bo's bulk accept, through a reader of its own
        await until(pilot, lambda: "Key columns differ" in words(app))
        await until(pilot, lambda: "The ledger changed: series keyed by product, but those in" in words(app))
        await pilot.press("n")
        await until(pilot, lambda: isinstance(app.screen, ChoiceDialog))


async def test_a_confirmation_stands_only_for_the_key_columns_it_named(ledger_path):
    """ana confirms deciding beside the ledger's product-and-region series; before her note is in, bo records a
    third set (product, region, channel).  Her decision is refused, naming it; nothing of hers is written, her
    note is kept, and the next key asks again."""
    signed_by_region(ledger_path)
    app = make_app(ledger_path, BY_PRODUCT)
    async with app.run_test(size=(100, 30)) as pilot:
        await started(app, pilot)
        await pilot.press("n")
        await until(pilot, lambda: isinstance(app.screen, ChoiceDialog))
        await pilot.press("up", "enter")
        await until(pilot, lambda: isinstance(app.screen, TextDialog))
        await pilot.press(*"promotion weeks")
        ledger.append(ledger_path, [ledger.Entry(series={"product": "tea", "region": "North", "channel": "web"},
                                                 action="note", fingerprint="f", results="ab" * 32, note="web shop")], BO)
        before = ledger_path.read_bytes()
        await pilot.press("enter")
        await until(pilot, lambda: "Not recorded" in words(app))
        assert "by product, region or product, channel, region" in words(app) and ledger_path.read_bytes() == before
        await pilot.press("escape")
        await pilot.press("n")
        await until(pilot, lambda: isinstance(app.screen, ChoiceDialog))
        assert "product, channel, region" in words(app)
        await pilot.press("up", "enter")
        await until(pilot, lambda: isinstance(app.screen, TextDialog))
        assert app.screen.query_one("#dialog-input").value == "promotion weeks"


def test_a_new_key_set_appended_just_before_the_write_is_refused_under_the_lock(ledger_path):
    """The session read an empty ledger; bo's product-and-region record lands after its last look, before the
    write: found under the writer's lock, the decision is refused and nothing is written."""
    from tui.factory import open_session
    session = open_session(BY_PRODUCT, ledger_path, ANA)
    shown = session.look(0)
    signed_by_region(ledger_path)
    before = ledger_path.read_bytes()
    session.reload_ledger = lambda **_: set()  # its look came just before bo's append
    with pytest.raises(Refused, match="by product, region .*confirm it first$"):
        session.decide(shown, "hold")
    assert ledger_path.read_bytes() == before


async def test_results_keyed_alike_that_share_no_series_are_said_and_the_first_decision_asks(ledger_path, tmp_path):
    """The sample's region values lower-cased: keyed by the ledger's columns, yet not one of its 154 series is in
    these results.  Before, the header said nothing and 'h' went straight to the note box (a new set of series,
    silently); now the header says it and the first decision asks, as for other key columns."""
    import csv
    signed_by_region(ledger_path)
    before = ledger_path.read_bytes()
    with open(SAMPLE / "wholesale.csv", newline="") as src, open(tmp_path / "lower.csv", "w", newline="") as out:
        rows = csv.DictReader(src)
        write = csv.DictWriter(out, rows.fieldnames)
        write.writeheader()
        write.writerows({**row, "region": row["region"].lower()} for row in rows)
    respelled = Source(data=tmp_path / "lower.csv", columns=Columns(segments=("region",), date="week"))
    app = make_app(ledger_path, respelled)
    async with app.run_test(size=(100, 30)) as pilot:
        session = await started(app, pilot)
        assert session.counts()["pending"] == session.results.n_series
        unshared = ("No series shared: none of the 154 series in ledger.jsonl is in these results (the same key "
                    "columns, other values); every series reads as pending")
        assert unshared in words(app)
        await pilot.press("h")
        await until(pilot, lambda: isinstance(app.screen, ChoiceDialog))
        assert "Yes: start a new set of series in ledger.jsonl" in words(app)
        await pilot.press("escape")
        await until(pilot, lambda: not isinstance(app.screen, ChoiceDialog))
        assert not isinstance(app.screen, TextDialog) and ledger_path.read_bytes() == before
        await held_after_yes(app, pilot, ledger_path)
        assert series_of(ledger_path)[-1]["region"].islower()
        await until(pilot, lambda: "No series shared" not in words(app))  # one is shared now: asked once
