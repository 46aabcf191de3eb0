"""Rows of different series read differently however long their names: each key part keeps a share of
the width and a long part loses its middle (the list, the evidence title and ``pricefold show`` alike)."""
from __future__ import annotations

import itertools

import pytest
from rich.cells import cell_len

from fitcore.widths import cells, shares
from tests.tui.conftest import all_listed, demand_source, listed_keys, make_app, show_rows
from tui.cells import key_label
from tui.factory import Source

# invented names of the shapes a trial used: two ~60-character product names that differ only at the end,
# a long store name beside a short one, an emoji and a name with markup-like text
PRODUCTS = ["extra long product description with many words 750 ml bottle",
            "extra long product description with many words 750 ml can",
            "tea 🍵 green", "plain [b]name[/b] oats"]
STORES = ["S1", "north-east distribution centre 12"]


def test_shares_keep_short_parts_whole_and_split_the_rest_evenly():
    assert shares([5, 100, 3], 40) == [5, 32, 3]
    assert shares([61, 33], 30) == [15, 15]
    assert shares([61, 33], 31) == [16, 15]
    assert shares([10, 12], 40) == [10, 12]


@pytest.mark.parametrize("width", range(14, 62))
def test_every_series_reads_differently_at_every_width(width):
    keys = list(itertools.product(PRODUCTS, STORES))
    labels = [key_label(key, width) for key in keys]
    assert all(cell_len(label) == width for label in labels)
    assert len(set(labels)) == len(keys), labels


def test_a_long_segment_keeps_both_ends():
    label = key_label(("tea", "north-east distribution centre 12"), 24)
    assert label == "tea · north-eas…entre 12"


def names_source(tmp_path) -> Source:
    return demand_source(tmp_path / "names.csv", itertools.product(PRODUCTS, STORES), "store", seed=1)


@pytest.mark.parametrize("size", [(80, 24), (120, 40)])
async def test_the_list_shows_every_series_distinctly(tmp_path, size):
    app = make_app(tmp_path / "ledger.jsonl", names_source(tmp_path))
    async with app.run_test(size=size) as pilot:
        await all_listed(app, pilot)
        keys = listed_keys(app, len(PRODUCTS) * len(STORES))
        assert len(keys) == len(PRODUCTS) * len(STORES)
        assert len(set(keys)) == len(keys), keys
        assert sum(key.rstrip().endswith(" 12") for key in keys) == len(PRODUCTS)  # the store's end stays


def test_show_lists_every_series_distinctly(tmp_path, capsys):
    rows = show_rows(capsys, names_source(tmp_path), tmp_path / "names.parquet")
    keys = [row.split("  ")[0] for row in rows]
    assert len(keys) == len(PRODUCTS) * len(STORES) and len(set(keys)) == len(keys), keys
    assert len({cell_len(row.rsplit(" 20 ", 1)[0]) for row in rows}) == 1  # the n column lines up (emoji too)


def test_show_measures_cells_as_the_screen_does():
    """``pricefold show`` cannot import the screen's measure (the report imports it): its own agrees with
    rich's ``cell_len`` on the names the list shows."""
    for text in [*PRODUCTS, *STORES, "מוצר ירוק", "緑茶 500 g", "café", "e\u0301", "🇳🇴 flag"]:
        assert cells(text) == cell_len(text), text
