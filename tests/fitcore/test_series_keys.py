"""``SeriesKeys.indices_of`` finds the series a key names, by a scan for a few keys and by a hash join for
many; both checked against a plain Python dictionary of the same keys (the standard library's lookup)."""
from __future__ import annotations

import numpy as np
import pytest

from fitcore.data.keys import FEW_KEYS, SeriesKeys


@pytest.fixture(scope="module")
def keys():
    rng = np.random.default_rng(5)
    products = [f"item {i} · {'é' * (i % 3)}" for i in rng.permutation(3000)]
    regions = ["North", "South", "East", ""]
    product = [products[i % 3000] for i in range(12000)]
    region = [regions[i // 3000] for i in range(12000)]
    return SeriesKeys(("product", "region"), {"product": product, "region": region}), product, region


@pytest.mark.parametrize("how_many", [1, FEW_KEYS, FEW_KEYS + 1, 500])  # scan, scan, join, join
def test_indices_of_agrees_with_a_dictionary(keys, how_many):
    series, product, region = keys
    where = {(p, r): s for s, (p, r) in enumerate(zip(product, region))}
    rng = np.random.default_rng(how_many)
    asked = [{"product": product[s], "region": region[s]} for s in rng.integers(0, len(product), how_many)]
    asked[::7] = [{"product": "no such item", "region": "North"}] * len(asked[::7])  # some name no series
    expected = [where.get((key["product"], key["region"]), -1) for key in asked]
    assert series.indices_of(asked).tolist() == expected


@pytest.mark.parametrize("how_many", [1, FEW_KEYS + 1])  # scan, join
def test_a_key_of_other_columns_names_no_series(keys, how_many):
    """A ledger's series keyed by product and region name none of a fit keyed by product alone, and the
    reverse, whatever the values (before: the columns the series lack were ignored and a missing one read as
    "", so a fit by product took every region's decisions, and ``fit --ledger`` backtested them)."""
    series, product, region = keys
    by_product = SeriesKeys(("product",), {"product": product})
    s = region.index("")  # a series whose region is "": a key without region must not find it either
    extra = [{"product": product[0], "region": region[0], "channel": "web"}] * how_many
    missing = [{"product": product[s]}] * how_many
    assert series.indices_of(extra).tolist() == [-1] * how_many
    assert series.indices_of(missing).tolist() == [-1] * how_many
    assert by_product.indices_of([{"product": product[0], "region": region[0]}] * how_many).tolist() == [-1] * how_many
    assert by_product.indices_of([{"product": product[0]}] * how_many).tolist() == [0] * how_many


def test_search_finds_a_name_by_its_shown_form():
    """Typing what the screen shows (an escape form, a control picture) finds the series: it searched the raw
    text, where '⟨U+202E⟩' and '␊' are not."""
    from fitcore.data.keys import SeriesKeys
    from fitcore.text import clean
    names = ["nosuch\u202eevil", "line\nbreak", "plain ␊ picture", "caf\u0065\u0301 noir"]
    keys = SeriesKeys(("product",), {"product": names})
    assert clean(names[0]) == "nosuch⟨U+202E⟩evil" and clean(names[1]) == "line␊break"
    assert keys.matching("⟨U+202E⟩evil").tolist() == [True, False, False, False]
    assert keys.matching("⟨u+202e⟩").tolist() == [True, False, False, False]
    assert keys.matching("e␊b").tolist() == [False, True, False, False]
    assert keys.matching("⟨U+240A⟩").tolist() == [False, False, True, False]  # the literal picture, as shown
    assert keys.matching("caf\u00e9").tolist() == [False, False, False, True]  # typed composed, held decomposed
    assert keys.matching("evil").tolist() == [True, False, False, False]
    assert keys.matching("⟨U+D800⟩").tolist() == [False] * 4  # a surrogate stands for no character: no error
