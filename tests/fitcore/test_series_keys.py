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
