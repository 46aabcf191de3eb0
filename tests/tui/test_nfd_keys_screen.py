"""A product named in two Unicode forms on the triage screen: 'café' composed in North, decomposed ('cafe' and a
combining accent) in North, East and South.  The list shows the decomposed rows revealed (``cafe⟨U+0301⟩``)
whatever the sort, the evidence title shows the whole revealed key where it fits, and a search typed in the
shown form lands on that series first."""
from __future__ import annotations

import json
import unicodedata

import numpy as np
import pytest

from fitcore.data.columns import Columns

from .conftest import all_listed, csv_source, make_app, screen_text

COMPOSED = "caf\u00e9"
DECOMPOSED = unicodedata.normalize("NFD", COMPOSED)
SHOWN = "cafe⟨U+0301⟩"
# invented products and regions; the café series sit among them
KEYS = ([(COMPOSED, "North"), (DECOMPOSED, "North"), (DECOMPOSED, "East"), (DECOMPOSED, "South")]
        + [(product, region) for product in ("tea 250 g", "rice 1 kg", "oats 500 g") for region in ("North", "East")])


def cafe_source(tmp_path):
    rng = np.random.default_rng(7)
    rows = [(product, region, p, round(400 - rng.uniform(50, 150) * p + rng.normal(0, 20)))
            for product, region in KEYS for p in np.round(rng.uniform(1, 2, 24), 2)]
    return csv_source(tmp_path / "cafe.csv", ["product", "region", "price", "volume"], rows,
                      Columns(segments=("region",)))


def cafe_rows(app) -> list[str]:
    return [line for line in screen_text(app).splitlines() if "caf" in line]


@pytest.mark.parametrize("sort", ["key", "score", "attention", "n"])
async def test_decomposed_rows_read_apart_from_the_composed_one_whatever_the_sort(tmp_path, sort):
    """Before: 'café · East' (decomposed) read as the composed product's East series; only a whole key read
    alike (café · North twice) was revealed."""
    app = make_app(tmp_path / "ledger.jsonl", cafe_source(tmp_path))
    async with app.run_test(size=(80, 24)) as pilot:
        session = await all_listed(app, pilot)
        session.set_sort(sort)
        app.screen.refresh_all()
        await pilot.pause()
        rows = cafe_rows(app)
        assert len(rows) == 4, rows
        assert sum(f"{SHOWN} · " in row for row in rows) == 3, rows
        assert sum("café · North " in row for row in rows) == 1, rows


@pytest.mark.parametrize("size", [(80, 24), (130, 30)])
async def test_the_title_shows_the_whole_revealed_key(tmp_path, size):
    """Before: the title's width was the unrevealed key's ('café · North', 12 cells), so the revealed one was cut
    to 'cafe… · No…h'."""
    app = make_app(tmp_path / "ledger.jsonl", cafe_source(tmp_path))
    async with app.run_test(size=size) as pilot:
        session = await all_listed(app, pilot)
        session.set_sort("key")
        for region in ("North", "East", "South"):
            s = next(int(s) for s in session.view if session.results.data.key_of(int(s)) ==
                     {"product": DECOMPOSED, "region": region})
            session.bring(s)
            app.screen.refresh_all()
            if size[0] < 110:  # the evidence on its own screen, as the analyst opens it
                await pilot.press("enter")
            await pilot.pause(0.3)
            titles = [line for line in screen_text(app).splitlines() if " obs, prices " in line]
            assert len(titles) == 1 and f" {SHOWN} · {region}  " in titles[0], titles
            if size[0] < 110:
                await pilot.press("escape")


async def test_a_search_typed_in_the_shown_form_lands_on_that_series_first(tmp_path):
    """Before: 'cafe⟨U+0301⟩ · North' matched both café · North series (either normal form) and landed on the
    composed one, listed first."""
    app = make_app(tmp_path / "ledger.jsonl", cafe_source(tmp_path))
    async with app.run_test(size=(80, 24)) as pilot:
        session = await all_listed(app, pilot)
        session.set_sort("key")
        key = session.results.data.key_of
        # on cafe⟨U+0301⟩ · South: the composed café · North is the next match below it, the other above
        session.bring(next(int(s) for s in session.view if key(int(s)) == {"product": DECOMPOSED, "region": "South"}))
        hit = session.search(f"{SHOWN} · North")
        assert key(session.current) == {"product": DECOMPOSED, "region": "North"}
        assert (hit.in_view, hit.exact) == (2, 1)
        session.search(f"{SHOWN} · North")  # again: the series in the other form next
        assert key(session.current) == {"product": COMPOSED, "region": "North"}
        session.search(f"{SHOWN} · North")
        assert key(session.current) == {"product": DECOMPOSED, "region": "North"}
        session.search(f"{COMPOSED} · North")  # typed composed: the composed one first
        assert key(session.current) == {"product": COMPOSED, "region": "North"}


async def test_a_dialog_and_its_notification_name_the_decomposed_series_as_the_list_shows_it(tmp_path):
    """Before: the note box asked 'Note on café · North' and the screen then said 'Noted: café · North' for the
    decomposed series, words that name the composed one just as well."""
    from tui.screens.dialogs import TextDialog

    from .conftest import on_series, until
    app = make_app(tmp_path / "ledger.jsonl", cafe_source(tmp_path))
    async with app.run_test(size=(100, 30)) as pilot:
        await all_listed(app, pilot)
        await on_series(app, pilot, {"product": DECOMPOSED, "region": "North"})
        await pilot.press("n")
        await until(pilot, lambda: isinstance(app.screen, TextDialog))
        assert f"Note on {SHOWN} · North" in " ".join(screen_text(app).split())
        await pilot.press(*"checked", "enter")
        book = tmp_path / "ledger.jsonl"
        await until(pilot, lambda: book.exists() and len(book.read_text().splitlines()) == 1)
        assert json.loads(book.read_text())["series"]["product"] == DECOMPOSED
        assert app.session.label(app.session.current) == f"{SHOWN} · North"
        await on_series(app, pilot, {"product": COMPOSED, "region": "North"})
        assert app.session.label(app.session.current) == "café · North"  # the composed one as it is
        await on_series(app, pilot, {"product": "tea 250 g", "region": "East"})
        assert app.session.label(app.session.current) == "tea 250 g · East"
