"""Names from users' files appear literally; failures reach the analyst as a dialog, not a crash."""
from __future__ import annotations

import csv

import numpy as np

from fitcore.data.loader import Columns
from fitcore.errors import DataError
from tests.tui.conftest import csv_source, make_app, screen_text, started, until
from tui.app import TriageApp
from tui.factory import Source

HOSTILE = ["[/]", "[bold]x", "\x1b[2Jwipe", "L" * 500, "מוצר ירוק", "[@click=app.quit]y"]


def hostile_source(tmp_path) -> Source:
    path = tmp_path / "hostile.csv"
    rng = np.random.default_rng(0)
    with open(path, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["product", "price", "volume"])
        for name in HOSTILE:
            for _ in range(30):
                price = round(rng.uniform(1, 3), 2)
                writer.writerow([name, price, round(500 - 100 * price + rng.normal(0, 5))])
    return Source(data=path, columns=Columns())


async def test_hostile_names_are_shown_literally(tmp_path):
    app = make_app(tmp_path / "ledger.jsonl", hostile_source(tmp_path))
    async with app.run_test(size=(160, 50)) as pilot:
        session = await started(app, pilot)
        await pilot.press("f", "home", "down", "enter")  # all series
        await pilot.pause()
        text = screen_text(app)
        assert "\x1b" not in text
        for shown in ("[/]", "[bold]x", "\u241b[2Jwipe", "LLLL…", "מוצר ירוק", "[@click=app.quit]y"):
            assert shown in text, shown
        for _ in range(len(HOSTILE)):  # the evidence title of each shows the name too
            await until(pilot, lambda: app.screen.evidence.series == session.current)
            await pilot.pause()
            label = session.label(session.current)
            assert label[:20] in screen_text(app)  # a long name loses its middle: its start and end stay
            await pilot.press("down")
        await pilot.press("a")
        await pilot.pause()
        assert app.is_running  # nothing was interpreted as an action


TWINS = ["line\nbreak", "line?break", "tab\there", "tab?here"]  # one placeholder '?' showed each pair as one


async def test_names_that_differ_only_in_a_control_character_stay_apart(tmp_path):
    """The list rows and the evidence titles of series whose names differ only where one has a control
    character: each shows its own name (line feed and tab as their control pictures), never the other's."""
    rng = np.random.default_rng(1)
    rows = [[name, p := round(rng.uniform(1, 3), 2), round(500 - 100 * p + rng.normal(0, 5))]
            for name in TWINS for _ in range(30)]
    app = make_app(tmp_path / "ledger.jsonl", csv_source(tmp_path / "twins.csv", ["product", "price", "volume"],
                                                          rows, Columns()))
    async with app.run_test(size=(80, 24)) as pilot:
        session = await started(app, pilot)
        await pilot.press("f", "home", "down", "enter")  # all series
        await pilot.pause()
        listed = [line for line in screen_text(app).splitlines()[3:] if " 30 " in line]
        shown = ["line\u240abreak", "line?break", "tab\u2409here", "tab?here"]
        assert sorted(line.split()[1] for line in listed) == sorted(shown), listed
        titles = set()
        for _ in TWINS:
            await pilot.press("enter")  # the evidence alone on an 80-column screen
            await until(pilot, lambda: app.screen.evidence.series == session.current)
            titles.add(screen_text(app).splitlines()[2].split()[0])
            await pilot.press("escape", "down")
        assert titles == set(shown)
        keys = [session.results.data.key_of(int(s))["product"] for s in session.view]
        session.cursor = keys.index("line\nbreak")
        app.screen.refresh_all()
        await pilot.pause()
        await pilot.press("h")  # a dialog's title names the series as the list does (not escaped a second time)
        await pilot.pause()
        assert "Hold line\u240abreak: why?" in screen_text(app) and "\u27e8" not in screen_text(app)


async def test_a_failed_open_is_a_dialog_and_a_clean_exit(tmp_path):
    def opener(progress):
        raise DataError("expected a column 'price', found 'prcie'", path="data.csv", line=1)
    app = TriageApp(opener)
    async with app.run_test(size=(80, 24)) as pilot:
        await app.workers.wait_for_complete()
        await pilot.pause()
        text = screen_text(app)
        assert "Could not open the triage" in text and "data.csv, line 1" in text
        await pilot.press("enter")
        await pilot.pause()
    assert app.return_code == 2


async def test_an_unexpected_failure_also_becomes_a_dialog(tmp_path):
    def opener(progress):
        raise RuntimeError("disk on fire")
    app = TriageApp(opener)
    async with app.run_test(size=(80, 24)) as pilot:
        await app.workers.wait_for_complete()
        await pilot.pause()
        assert "RuntimeError: disk on fire" in screen_text(app)


async def test_a_very_long_product_name_leaves_its_segment_and_counts_in_the_evidence_title(tmp_path):
    """100,000 characters of product name: the evidence title still shows the region and the count."""
    path = tmp_path / "long.csv"
    rng = np.random.default_rng(1)
    with open(path, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["product", "region", "price", "volume"])
        for _ in range(30):
            price = round(rng.uniform(1, 3), 2)
            writer.writerow(["x" * 100_000, "North", price, round(500 - 100 * price + rng.normal(0, 5))])
    app = make_app(tmp_path / "ledger.jsonl", Source(data=path, columns=Columns(segments=("region",))))
    async with app.run_test(size=(160, 40)) as pilot:
        await started(app, pilot)
        await pilot.press("f", "home", "down", "enter")  # all series
        await until(pilot, lambda: "x…x" in screen_text(app) and "xxx · North  30 obs" in screen_text(app))
